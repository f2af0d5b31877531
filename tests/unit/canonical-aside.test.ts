// The worker thread that writes a big lot's numbers while the engine runs must give exactly the
// bytes the main thread would (RFC 8785's number form, checked against the reference package in
// canonical-numbers.test.ts), and must step aside whenever it cannot: then the caller writes them.
import { afterAll, describe, expect, it } from 'vitest';
import { ASIDE_MIN_LENGTH, asideWorkerReady, startAsideWorker, stopAsideWorker, writeNumberArraysAside } from '../../server/verdicts/canonical-aside';
import { canonicalJsonBytes, canonicalJsonReference, numberArrayJson } from '../../server/verdicts/canonical';

function rng(seed: number) {
  let s = seed >>> 0;
  return () => ((s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 2 ** 32);
}

async function untilReady(): Promise<void> {
  startAsideWorker();
  for (let i = 0; i < 300 && !asideWorkerReady(); i++) await new Promise((r) => setTimeout(r, 50));
  expect(asideWorkerReady()).toBe(true);
}

afterAll(() => stopAsideWorker());

describe('writeNumberArraysAside', () => {
  it('writes nothing for short arrays (the main thread is quicker for them)', async () => {
    const known = await writeNumberArraysAside([[1, 2, 3], Array.from({ length: ASIDE_MIN_LENGTH - 1 }, () => 500)]);
    expect(known.size).toBe(0);
  });

  it('gives the bytes of the main-thread writer for big arrays, by array identity', async () => {
    await untilReady();
    const r = rng(3);
    const measurements = Array.from({ length: 300_000 }, (_, i) => (i % 5 === 0 ? r() * 1e4 : Math.round((495 + r() * 12) * 100) / 100));
    measurements[17] = -0;
    measurements[18] = 1e21;
    measurements[19] = 5e-324;
    const tares = Array.from({ length: ASIDE_MIN_LENGTH }, () => Math.round((18 + r()) * 10) / 10);
    const known = await writeNumberArraysAside([measurements, tares, undefined, null]);
    expect(known.size).toBe(2);
    expect(known.get(measurements)!.toString('latin1')).toBe(numberArrayJson(measurements));
    expect(known.get(measurements)!.toString('latin1')).toBe(JSON.stringify(measurements));
    expect(known.get(tares)!.toString('latin1')).toBe(JSON.stringify(tares));
    // and a document built with them is byte for byte the reference package's canonical form
    const doc = { lot: { measurements, tares, line: 'Linie Süd' } };
    expect(canonicalJsonBytes(doc, known).equals(Buffer.from(canonicalJsonReference(doc), 'utf8'))).toBe(true);
  });

  it('leaves out an array holding anything but numbers (the main thread then refuses or writes it)', async () => {
    await untilReady();
    const mixed: unknown[] = Array.from({ length: ASIDE_MIN_LENGTH + 10 }, () => 500.5);
    mixed[ASIDE_MIN_LENGTH] = '500.5';
    const numbers = Array.from({ length: ASIDE_MIN_LENGTH }, (_, i) => 400 + i / 100);
    const known = await writeNumberArraysAside([mixed, numbers]);
    expect(known.has(mixed)).toBe(false);
    expect(known.get(numbers)!.toString('latin1')).toBe(JSON.stringify(numbers));
  });

  it('answers with nothing, never an error, once the worker is gone', async () => {
    await untilReady();
    const big = Array.from({ length: ASIDE_MIN_LENGTH }, () => 250.25);
    const pending = writeNumberArraysAside([big]);
    await stopAsideWorker();
    const known = await pending;
    // either the worker finished first or it was stopped: never a wrong answer
    if (known.has(big)) expect(known.get(big)!.toString('latin1')).toBe(JSON.stringify(big));
    expect(asideWorkerReady()).toBe(false);
    // and the next call starts a new worker, answering with nothing until it is ready
    expect((await writeNumberArraysAside([big])).size).toBe(0);
    await untilReady();
    expect((await writeNumberArraysAside([big])).get(big)!.toString('latin1')).toBe(JSON.stringify(big));
  });
});
