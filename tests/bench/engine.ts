/**
 * Engine benchmark (`npm run bench:engine`): median time of a full evaluateLot (eu-76-211, every
 * criterion and assumption check that applies) for n = 50, 5 000, 100 000 and 1 000 000
 * measurements, R's t.test on the same data measured in the same run, the ratio, and
 * Shapiro–Wilk alone at n = 5 000. Data come from the seeded generator of the engine tests.
 * Targets (issue 3): 1 000 000 measurements under 60 ms; Shapiro–Wilk n = 5 000 under 3 ms.
 */
import { evaluateLot, type LotInput } from '../../shared/engine';
import { shapiroWilk } from '../../shared/engine/assumptions/shapiroWilk';
import { SeededRandom, generate } from '../engine/reference/datasets';
import { runR } from '../engine/reference/runR';

function medianMs(fn: () => void, runs: number): number {
  for (let i = 0; i < Math.min(3, runs); i++) fn(); // warm-up
  const times: number[] = [];
  for (let i = 0; i < runs; i++) {
    const t0 = performance.now();
    fn();
    times.push(performance.now() - t0);
  }
  times.sort((a, b) => a - b);
  return times[Math.floor(times.length / 2)]!;
}

const rng = new SeededRandom(42);
const sizes = [50, 5_000, 100_000, 1_000_000];
const rows: { n: number; engine: number; r: number | null }[] = [];
const datasets = sizes.map((n) => generate(rng, n, 'normal', 502, 3));

let rTimes: Map<string, (number | null)[]> | null = null;
try {
  rTimes = runR(
    sizes.map((n, i) => ({ kind: 'B' as const, id: `b${n}`, reps: n >= 1_000_000 ? 3 : n >= 100_000 ? 10 : 200, x: datasets[i]! })),
  );
} catch (e) {
  console.error(`Rscript failed, R timings omitted: ${(e as Error).message.split('\n')[0]}`);
}

for (let i = 0; i < sizes.length; i++) {
  const n = sizes[i]!;
  const input: LotInput = {
    product: { nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211' } },
    lot: { lotSize: n, testing: 'non-destructive', measurementUnit: 'g', measurements: datasets[i]! },
  };
  const check = evaluateLot(input);
  if (!check.ok) throw new Error(check.error.message);
  const engine = medianMs(() => evaluateLot(input), n >= 1_000_000 ? 15 : n >= 100_000 ? 31 : 101);
  rows.push({ n, engine, r: rTimes?.get(`b${n}`)?.[0] ?? null });
}

console.log('full eu-76-211 evaluation (median ms) vs R t.test on the same data (median ms, same run)');
console.log('n'.padStart(9), 'engine ms'.padStart(11), 'R t.test ms'.padStart(12), 'engine/R'.padStart(9));
for (const r of rows) {
  console.log(
    String(r.n).padStart(9),
    r.engine.toFixed(3).padStart(11),
    (r.r === null ? 'n/a' : r.r.toFixed(3)).padStart(12),
    (r.r === null || r.r === 0 ? 'n/a' : (r.engine / r.r).toFixed(2)).padStart(9),
  );
}
const sw = datasets[1]!;
const swMs = medianMs(() => shapiroWilk(sw), 201);
console.log(`Shapiro–Wilk n = 5000, coefficients cached per n: median ${swMs.toFixed(3)} ms (target < 3 ms)`);
// Cold: a size not seen before, so Royston's coefficients (2 500 normal quantiles) are computed too.
const coldMs: number[] = [];
for (let k = 0; k < 21; k++) {
  const x = sw.slice(0, 4900 - k);
  const t0 = performance.now();
  shapiroWilk(x);
  coldMs.push(performance.now() - t0);
}
coldMs.sort((a, b) => a - b);
console.log(`Shapiro–Wilk n ≈ 4 900, coefficients not cached: median ${coldMs[10]!.toFixed(3)} ms`);
const big = rows.find((r) => r.n === 1_000_000)!;
console.log(`full verdict n = 1 000 000: median ${big.engine.toFixed(1)} ms (target < 60 ms)`);
