// One database round trip per key at a time: callers that arrive while a round trip for their key
// is in flight wait and are settled together by the next one — never by one sent before they
// arrived, so each still sees every commit made before it asked. Used for hot-path reads
// (db/raw.ts freshReads) and for rate-limit counters (services/rate-limits.ts).
// Own code: no maintained package does per-key "next round trip" batching with this guarantee.

/**
 * `settle(key, count)` runs one round trip for `count` waiting callers of `key` and returns the
 * result for the i-th of them (in arrival order); if it throws, all of them get the error.
 */
export function perKeyBatches<R>(settle: (key: string, count: number) => Promise<(i: number) => R>): (key: string) => Promise<R> {
  const waiting = new Map<string, { resolve: (v: R) => void; reject: (e: unknown) => void }[]>();
  const busy = new Set<string>();
  async function drain(key: string): Promise<void> {
    busy.add(key);
    try {
      for (;;) {
        const batch = waiting.get(key);
        if (!batch || batch.length === 0) break;
        waiting.delete(key);
        try {
          const resultFor = await settle(key, batch.length);
          batch.forEach((w, i) => w.resolve(resultFor(i)));
        } catch (e) {
          for (const w of batch) w.reject(e);
        }
      }
    } finally {
      busy.delete(key);
    }
  }
  return (key) =>
    new Promise<R>((resolve, reject) => {
      let q = waiting.get(key);
      if (!q) waiting.set(key, (q = []));
      q.push({ resolve, reject });
      if (!busy.has(key)) void drain(key);
    });
}
