// One verdict: its detail, its sealed document (the export), a seal's lookup and a recomputation.
// (The filtered, counted, cursor-paged list: stores/verdictFinder.ts.)
import { defineStore } from 'pinia';
import { api, call } from '../api/client';
import type { components } from '../../../shared/api/schema';

export type Verdict = components['schemas']['Verdict'];
export type SealedDocument = components['schemas']['SealedDocument'];
export type SealLookup = components['schemas']['SealLookup'];
export type Recomputation = components['schemas']['Recomputation'];

export const useVerdictsStore = defineStore('verdicts', () => {
  async function get(id: string): Promise<Verdict> {
    return call(api.GET('/v1/verdicts/{verdictId}', { params: { path: { verdictId: id } } }));
  }

  /** The sealed document (the record the seal covers, with the lot's input), as exported. */
  async function document(id: string): Promise<SealedDocument> {
    return call(api.GET('/v1/verdicts/{verdictId}/export', { params: { path: { verdictId: id } } }));
  }

  async function bySeal(seal: string): Promise<SealLookup> {
    return call(api.GET('/v1/seals/{seal}', { params: { path: { seal } } }));
  }

  /** Re-run the engine on the stored input (recomputeVerdict): was the stored result reproduced exactly? */
  async function recompute(id: string): Promise<Recomputation> {
    return call(api.POST('/v1/verdicts/{verdictId}/recompute', { params: { path: { verdictId: id } } }));
  }

  return { get, document, bySeal, recompute };
});
