// perKeyBatches: one round trip per key at a time, and a caller is never settled by a round trip
// that was already on its way when it arrived.
import { describe, expect, it } from 'vitest';
import { perKeyBatches } from '../../server/db/per-key-batches.speedup';

function deferred<T>() {
  let resolve!: (v: T) => void;
  let reject!: (e: unknown) => void;
  const promise = new Promise<T>((res, rej) => ((resolve = res), (reject = rej)));
  return { promise, resolve, reject };
}

describe('perKeyBatches', () => {
  it('settles late arrivals with the next round trip, in arrival order, one trip per key at a time', async () => {
    const trips: Array<{ key: string; count: number; done: ReturnType<typeof deferred<string>> }> = [];
    const run = perKeyBatches(async (key, count) => {
      const done = deferred<string>();
      trips.push({ key, count, done });
      const tag = await done.promise;
      return (i) => `${tag}#${i}`;
    });
    const a = run('k');
    await Promise.resolve();
    expect(trips.map((t) => [t.key, t.count])).toEqual([['k', 1]]);
    const b = run('k');
    const c = run('k');
    const other = run('j');
    await Promise.resolve();
    // 'k' still has one trip in flight; 'j' got its own at once
    expect(trips.map((t) => [t.key, t.count])).toEqual([['k', 1], ['j', 1]]);
    trips[0]!.done.resolve('first');
    expect(await a).toBe('first#0');
    await new Promise((r) => setTimeout(r, 0));
    expect(trips.map((t) => [t.key, t.count])).toEqual([['k', 1], ['j', 1], ['k', 2]]);
    trips[2]!.done.resolve('second');
    expect([await b, await c]).toEqual(['second#0', 'second#1']);
    trips[1]!.done.resolve('jay');
    expect(await other).toBe('jay#0');
  });

  it('rejects every caller of a failed round trip and keeps serving the key', async () => {
    let fail = true;
    const run = perKeyBatches(async () => {
      if (fail) throw new Error('database gone');
      return () => 'ok';
    });
    await expect(run('k')).rejects.toThrow('database gone');
    fail = false;
    expect(await run('k')).toBe('ok');
  });
});
