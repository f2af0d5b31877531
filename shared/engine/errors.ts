import type { EngineError } from './types';

/** Builds an engine error; `pointer` is an RFC 6901 JSON pointer into the LotInput. */
export function engineError(code: string, message: string, pointer: string): EngineError {
  return { code, message, pointer };
}
