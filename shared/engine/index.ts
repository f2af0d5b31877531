/**
 * Lotproof conformance engine: pure TypeScript, no I/O, no Node-only APIs (runs in the server
 * and in the browser). The public contract is what this module exports.
 */
export { ENGINE_VERSION } from './version';
export { evaluateLot, CAUTION } from './evaluate';
export { listRulebooks } from './rulebooks/registry';
export { tolerableNegativeError } from './rulebooks/tne';
export { UNIT_NAMES } from './units';
export { tTest, tTestFromSummary, zTestFromSummary } from './inference/meanTest';
export { wilcoxonSignedRank } from './inference/wilcoxonSignedRank';
export { shapiroWilk } from './assumptions/shapiroWilk';
export { describe } from './stats/describe';
export type * from './types';
