// The ledger's checkpoints and checks: the list (newest first), issuing one now, the check of a range
// against the latest checkpoint, a full walk followed to its end, and a seal's proof against the
// latest checkpoint checked in this browser (lib/checkpoints.ts) against the checkpoints it kept.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { ApiError } from '../api/problem';
import { useRequestState } from './request-state';
import { useSealsStore } from './seals';
import { proveSealInLedger, type Checkpoint, type LedgerProofReport, type LedgerSource } from '../lib/checkpoints';
import type { components } from '../../../shared/api/schema';

export type LedgerCheck = components['schemas']['LedgerCheck'];
export type LedgerWalk = components['schemas']['LedgerWalk'];

const notFoundAs = async <T, U>(work: Promise<T>, missing: U): Promise<T | U> => {
  try {
    return await work;
  } catch (err) {
    if (err instanceof ApiError && err.status === 404) return missing;
    throw err;
  }
};

/** The API as the browser's checks see it: answers to check, never to take on trust. */
export function apiLedgerSource(): LedgerSource {
  const seals = useSealsStore();
  return {
    inclusion: (seal) => notFoundAs(call(api.GET('/v1/ledger/proofs/inclusion', { params: { query: { seal: seal.toLowerCase() } } })), null),
    consistency: async (fromSize, toSize) => {
      const reply = await notFoundAs(call(api.GET('/v1/ledger/proofs/consistency', { params: { query: { fromSize, toSize } } })), 'missing' as const);
      return reply === 'missing' ? reply : reply.proof;
    },
    jwks: () => seals.publicKeys(),
  };
}

/** How often a running walk is asked for its progress. */
const WALK_POLL_MS = 1000;

export const useCheckpointsStore = defineStore('checkpoints', () => {
  const items = ref<Checkpoint[]>([]);
  const nextCursor = ref<string | null>(null);
  const { loading, problem, track } = useRequestState();

  async function load(): Promise<void> {
    await track(async () => {
      const page = await call(api.GET('/v1/ledger/checkpoints', { params: { query: { limit: 20 } } }));
      items.value = page.items;
      nextCursor.value = page.nextCursor;
    });
  }
  async function loadMore(): Promise<void> {
    if (!nextCursor.value) return;
    const page = await call(api.GET('/v1/ledger/checkpoints', { params: { query: { limit: 20, cursor: nextCursor.value } } }));
    items.value = [...items.value, ...page.items];
    nextCursor.value = page.nextCursor;
  }
  /** Issues a checkpoint now; `created` is false when nothing was appended since the latest. */
  async function issue(): Promise<{ checkpoint: Checkpoint; created: boolean }> {
    let status = 0;
    const checkpoint = await call(api.POST('/v1/ledger/checkpoints').then((r) => ((status = r.response.status), r)));
    const created = status === 201;
    if (created) items.value = [checkpoint, ...items.value.filter((c) => c.treeSize !== checkpoint.treeSize)];
    return { checkpoint, created };
  }
  function checkRange(range: { from?: number; to?: number }): Promise<LedgerCheck> {
    return call(api.GET('/v1/ledger/verify', { params: { query: range } }));
  }

  const walk = ref<LedgerWalk | null>(null);
  let following = 0;
  /** Starts a walk and follows it until it has finished (or the page stops following it). */
  async function startWalk(): Promise<void> {
    walk.value = await call(api.POST('/v1/ledger/walks'));
    const mine = ++following;
    while (walk.value.status === 'running' && mine === following) {
      await new Promise((r) => setTimeout(r, WALK_POLL_MS));
      if (mine !== following) return;
      walk.value = await call(api.GET('/v1/ledger/walks/{walkId}', { params: { path: { walkId: walk.value.id } } }));
    }
  }
  function stopFollowing(): void {
    following++;
  }

  /** A seal's place in the ledger, checked in this browser; null when the ledger has no checkpoint covering it. */
  function proveSeal(seal: string): Promise<LedgerProofReport | null> {
    return proveSealInLedger(seal, apiLedgerSource());
  }

  return { items, nextCursor, loading, problem, load, loadMore, issue, checkRange, walk, startWalk, stopFollowing, proveSeal };
});
