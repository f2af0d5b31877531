/**
 * Lotproof conformance engine: pure TypeScript, no I/O, no Node-only APIs (runs in the server
 * and in the browser). The public contract is what this module exports.
 */
export { ENGINE_VERSION } from './version';
export { evaluateLot } from './evaluate';
export { listRulebooks } from './rulebooks/registry';
export { tolerableNegativeError } from './rulebooks/tne';
export { UNIT_NAMES } from './units';
export type * from './types';
