// The fast writer of number arrays must give exactly JSON.stringify's text (RFC 8785's number form).
import { describe, expect, it } from 'vitest';
import { canonicalJson, canonicalJsonBytes, canonicalJsonReference } from '../../server/verdicts/canonical';
import { numberArrayJson } from '../../server/verdicts/canonical-numbers.speedup';

function rng(seed: number) {
  let s = seed >>> 0;
  return () => ((s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 2 ** 32);
}

describe('numberArrayJson', () => {
  it('agrees with JSON.stringify on edge values', () => {
    const edge = [0, -0, 1, -1, 0.1, 0.2, 0.3, 0.001, -0.001, 0.0005, 1e-6, 1e-7, 5e-324, 0.1 + 0.2, 999999999999.999, 1e12, 1e15, 1e21, 1e22,
      -1e21, 123456789012.5, 2 ** 53, 2 ** 53 + 2, Number.MAX_SAFE_INTEGER, Number.MAX_VALUE, -Number.MAX_VALUE, Number.MIN_VALUE, 503.1, 503.10000000000002,
      499.999, 500.005, 1.005, 4.35, 0.07, 100, 1000.5, 33.333, 33.3333];
    expect(numberArrayJson(edge)).toBe(JSON.stringify(edge));
  });

  it('agrees with JSON.stringify on a million random values of every kind', () => {
    const r = rng(42);
    const makers = [
      () => Math.round(r() * 1e6) / 100,
      () => Math.round(r() * 1e7) / 1000,
      () => -Math.round(r() * 1e5) / 10,
      () => r() * 1e4,
      () => r() * 1e-3,
      () => Math.round(r() * 1e15) / 1000,
      () => Math.round(r() * 1e18) / 1000,
      () => (r() - 0.5) * 1e300,
      () => Math.round(r() * 1e9),
    ];
    const values = Array.from({ length: 1_000_000 }, (_, i) => makers[i % makers.length]!());
    expect(numberArrayJson(values)).toBe(JSON.stringify(values));
  });

  it('is what canonicalJson uses for long number arrays, and matches the reference package', () => {
    const r = rng(7);
    const lot = { measurements: Array.from({ length: 5000 }, () => Math.round((500 + r() * 8) * 100) / 100), tares: [1.5, 2] };
    expect(canonicalJson(lot)).toBe(canonicalJsonReference(lot));
  });

  it('gives as bytes exactly the UTF-8 of the reference package\'s text, also around non-Latin-1 text', () => {
    const r = rng(11);
    // Long arrays (the fast writer, both the buffer it keeps and the one it hands over), short
    // ones, and strings outside Latin-1 (which V8 stores at two bytes per character) next to them.
    for (const n of [3, 9, 5000, 200_000]) {
      const doc = {
        lot: { line: 'Linie Süd – Ω 3 𝄞', measurements: Array.from({ length: n }, () => Math.round((500 + r() * 8) * 1000) / 1000) },
        sentence: 'mean ≥ Qn − 0.379 × s; μ₀',
        nested: [{ z: 1, a: [0.5, -0, 1e21] }],
      };
      const bytes = canonicalJsonBytes(doc);
      expect(bytes.equals(Buffer.from(canonicalJsonReference(doc), 'utf8'))).toBe(true);
      expect(bytes.toString('utf8')).toBe(canonicalJson(doc));
    }
  });

  it('matches the reference package on random nested documents (key order, escapes, index-like keys)', () => {
    const r = rng(5);
    const pick = <T>(xs: readonly T[]) => xs[Math.floor(r() * xs.length)]!;
    const keyPool = ['a', 'b', 'A', 'é', 'z1', '10', '2', '01', '__proto__', 'ключ', '\u20ac', '\ud83d\ude00', ' ', '', 'line\nbreak', 'q"uote'];
    const strPool = ['', 'plain', 'tab\t', 'ctl\u0001\u001f', 'quote " and \\', 'Ω≥μ−', '\ud83d\ude00 pair', '\u2028\u2029', '</script>'];
    const numPool = [0, -0, 1, -1.5, 0.1, 1e21, 1e-7, 123456789.125, Number.MAX_VALUE, 5e-324, 503.14];
    const make = (depth: number): unknown => {
      const t = depth > 3 ? Math.floor(r() * 4) : Math.floor(r() * 6);
      if (t === 0) return pick(strPool);
      if (t === 1) return pick(numPool);
      if (t === 2) return pick([true, false, null]);
      if (t === 3) return r() < 0.5 ? pick(numPool) : pick(strPool);
      if (t === 4) return Array.from({ length: Math.floor(r() * 5) }, () => make(depth + 1));
      const o: Record<string, unknown> = {};
      for (let i = Math.floor(r() * 6); i > 0; i--) Object.defineProperty(o, pick(keyPool), { value: make(depth + 1), enumerable: true, writable: true, configurable: true });
      return o;
    };
    for (let i = 0; i < 3000; i++) {
      const doc = { x: make(0), y: [make(1), make(1)] };
      expect(canonicalJson(doc)).toBe(canonicalJsonReference(doc));
    }
    expect(() => canonicalJson({ s: 'lone \ud800' })).toThrow();
    expect(() => canonicalJson({ n: Number.NaN })).toThrow();
    expect(() => canonicalJson({ f: () => 1 })).toThrow();
  });
});
