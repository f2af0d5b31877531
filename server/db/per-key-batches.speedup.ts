// Speed-up: one database round trip per key at a time. Callers that arrive while a round trip for
// their key is in flight wait and are settled together by the next one — never by one sent before
// they arrived, so each still sees every commit made before it asked. Used for hot-path reads
// (db/raw.ts freshReads: the API-key check, a lot's product) and for rate-limit counters
// (metering/rate-limits.ts).
// Measured gain (issue 13, 2026-12-03, `BENCH_ONLY=bare,api npm run bench:api`, 2 shared cores at
// load 4–10, against the same server with one read and one counter upsert per call): interleaved
// runs, Lotproof / bare 32.8 %, 20.1 %, 48.7 % with it against 7.8 %, 11.7 %, 7.7 % without
// (pairs +322 %, +72 %, +536 %), server CPU per lot 2.1–3.3 ms against 4.2–6.7 ms; side by side
// in one run (12 alternating 4 s slices), sealed lots per second +86 % (median). Without it every
// request of a key queues behind the same row lock of its rate-limit counter.
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
