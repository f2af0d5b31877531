// Finding lots: the verdicts list under the finder's filters (packing and sealing dates, partial
// lot code and line, decision, withdrawn or not), cursor-paged, with the summary counts of
// everything the filter selects (listVerdicts with counts=true). The server filters and counts.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { useRequestState } from './request-state';
import { finderApiQuery, type FinderFilters, type VerdictCounts } from '../components/verdicts/lotFinder';
import type { components } from '../../../shared/api/schema';

type Verdict = components['schemas']['Verdict'];
const PAGE_SIZE = 25;

export const useVerdictFinderStore = defineStore('verdictFinder', () => {
  const items = ref<Verdict[]>([]);
  const counts = ref<VerdictCounts | null>(null);
  const { loading, problem, track } = useRequestState();
  /** Cursors of the pages seen so far: cursors[i] opens page i (page 0 has none). */
  const cursors = ref<(string | null)[]>([null]);
  const page = ref(0);
  const nextCursor = ref<string | null>(null);
  let lastFilters = '';

  async function load(filters: FinderFilters, pageIndex = 0): Promise<void> {
    const key = JSON.stringify(filters);
    if (key !== lastFilters) {
      cursors.value = [null];
      pageIndex = 0;
    }
    lastFilters = key;
    await track(async () => {
      const cursor = cursors.value[pageIndex] ?? null;
      const query = finderApiQuery(filters, { cursor, limit: PAGE_SIZE, counts: true });
      const res = await call(api.GET('/v1/verdicts', { params: { query: query as never } }));
      items.value = res.items;
      counts.value = res.counts ?? null;
      page.value = pageIndex;
      nextCursor.value = res.nextCursor ?? null;
      cursors.value[pageIndex + 1] = nextCursor.value;
      cursors.value.length = pageIndex + 2;
    });
  }

  return { items, counts, loading, problem, page, nextCursor, load };
});
