/** Semantic version of the engine. Bump on any change that can change a verdict for the same input. */
export const ENGINE_VERSION = '2.0.0';
