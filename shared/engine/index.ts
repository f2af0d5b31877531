/**
 * Lotproof conformance engine: pure TypeScript, no I/O, no Node-only APIs (runs in the server
 * and in the browser). The public contract is what this module exports.
 */
export { ENGINE_VERSION } from './version';
export { evaluateLot, evaluateLotForMarkets } from './evaluate';
export { evaluateLotAs, KEPT_ENGINE_VERSIONS } from './legacy/kept-engines';
export { listRulebooks, tolerableNegativeError } from './rulebooks/registry';
export { UNIT_NAMES } from './units';
export type * from './types';
