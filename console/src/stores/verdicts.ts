// Verdicts: the filtered, sorted, cursor-paged list, one verdict's detail, and the export.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { useRequestState } from './request-state';
import { apiQuery, type VerdictFilters } from '../lib/verdictFilters';
import type { components } from '../../../shared/api/schema';

export type Verdict = components['schemas']['Verdict'];
export type SealedDocument = components['schemas']['SealedDocument'];
export type SealLookup = components['schemas']['SealLookup'];
export type Recomputation = components['schemas']['Recomputation'];

export const useVerdictsStore = defineStore('verdicts', () => {
  const items = ref<Verdict[]>([]);
  const { loading, problem, track } = useRequestState();
  /** Cursors of the pages seen so far: cursors[i] opens page i (page 0 has none). */
  const cursors = ref<(string | null)[]>([null]);
  const page = ref(0);
  const nextCursor = ref<string | null>(null);
  let lastFilters: VerdictFilters | null = null;

  async function load(filters: VerdictFilters, pageIndex = 0): Promise<void> {
    if (lastFilters && JSON.stringify(lastFilters) !== JSON.stringify(filters)) {
      cursors.value = [null];
      pageIndex = 0;
    }
    lastFilters = { ...filters };
    await track(async () => {
      const cursor = cursors.value[pageIndex] ?? null;
      const res = await call(api.GET('/v1/verdicts', { params: { query: apiQuery(filters, cursor) as never } }));
      items.value = res.items;
      page.value = pageIndex;
      nextCursor.value = res.nextCursor ?? null;
      cursors.value[pageIndex + 1] = nextCursor.value;
      cursors.value.length = pageIndex + 2;
    });
  }

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

  return { items, loading, problem, page, nextCursor, load, get, document, bySeal, recompute };
});
