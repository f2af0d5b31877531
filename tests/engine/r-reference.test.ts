/**
 * The engine against R (Debian r-base-core; stats::t.test, shapiro.test, wilcox.test, qt, pt),
 * run at test time on a few hundred datasets from the seeded generator in reference/datasets.ts.
 * All tasks go to R in one Rscript call. Tolerances (issue 3): t and p to 1e-10 relative (or
 * 1e-15 absolute for tiny p), Shapiro–Wilk W to 1e-8 and its p to 1e-6.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { runR, type RTask } from './reference/runR';
import { SeededRandom, SHAPES, generate, type Shape } from './reference/datasets';
import { tTest } from '../../shared/engine/inference/meanTest';
import { shapiroWilk } from '../../shared/engine/assumptions/shapiroWilk';
import { wilcoxonSignedRank } from '../../shared/engine/inference/wilcoxonSignedRank';
import { studentTLowerTail, studentTQuantile, studentTUpperTail } from '../../shared/engine/distributions/studentT';
import { meanCheckFactor } from '../../shared/engine/rulebooks/criteria';
import type { Alternative } from '../../shared/engine/types';

const ALTERNATIVES: readonly Alternative[] = ['less', 'greater', 'two-sided'];

function close(actual: number, expected: number, rel: number, abs = 0): boolean {
  return Math.abs(actual - expected) <= Math.max(rel * Math.abs(expected), abs);
}

function expectClose(label: string, actual: number | null, expected: number | null, rel: number, abs = 0): void {
  if (expected === null || actual === null) {
    expect(actual, label).toBe(expected);
    return;
  }
  if (!close(actual, expected, rel, abs)) {
    throw new Error(`${label}: engine ${actual} vs R ${expected} (rel ${Math.abs(actual - expected) / Math.abs(expected)})`);
  }
}

interface Case {
  id: string;
  shape: Shape;
  x: number[];
  alternative: Alternative;
  mu: number;
  alpha: number;
}

const rng = new SeededRandom(20240611);
const tCases: Case[] = [];
for (let i = 0; i < 240; i++) {
  // n log-uniform on 3 … 5000
  const n = Math.round(Math.exp(Math.log(3) + rng.next() * (Math.log(5000) - Math.log(3))));
  const shape = SHAPES[i % SHAPES.length]!;
  const x = generate(rng, n, shape, 500, 1 + rng.next() * 6);
  // hypothesised mean from well inside to far outside the data, so p ranges from ~1 to tiny
  const mu = 500 + (rng.next() - 0.5) * (i % 5 === 0 ? 20 : 2);
  const alpha = [0.05, 0.01, 0.005][i % 3]!;
  tCases.push({ id: `t${i}`, shape, x, alternative: ALTERNATIVES[i % 3]!, mu, alpha });
}

interface WCase {
  id: string;
  x: number[];
  alternative: Alternative;
  mu: number;
  exact: boolean | null;
}
const wCases: WCase[] = [];
for (let i = 0; i < 120; i++) {
  const kind = i % 4; // 0: exact (n < 50, continuous), 1: ties (approximate), 2: large n (approximate), 3: forced normal approximation
  const n = kind === 2 ? rng.int(50, 400) : rng.int(3, 49);
  const shape: Shape = kind === 1 ? 'rounded' : SHAPES[i % SHAPES.length]!;
  const x = generate(rng, n, shape === 'rounded' && kind !== 1 ? 'normal' : shape, 500, 3);
  const mu = kind === 1 ? 500 : 500 + (rng.next() - 0.5) * 4; // mu = 500 on rounded data also makes zeros
  wCases.push({ id: `w${i}`, x, alternative: ALTERNATIVES[i % 3]!, mu, exact: kind === 3 ? false : null });
}

const qGrid: { id: string; p: number; df: number }[] = [];
const pGrid: { id: string; t: number; df: number }[] = [];
{
  const dfs = [1, 2, 3, 4, 7, 12, 19, 29, 49, 79, 124, 499, 4999, 99999, 999999];
  const ps = [1e-12, 1e-6, 0.001, 0.005, 0.025, 0.05, 0.1, 0.3, 0.5, 0.7, 0.95, 0.975, 0.99, 0.995, 0.999];
  const ts = [-40, -8, -3.3, -2, -1, -0.2, 0, 0.5, 1.7, 2.6, 5, 12, 60];
  let k = 0;
  for (const df of dfs) {
    for (const p of ps) qGrid.push({ id: `q${k++}`, p, df });
    for (const t of ts) pGrid.push({ id: `p${k++}`, t, df });
  }
}

// Sample sizes of the shipped plans (Directive Annex II 2.2–2.3, UK SI 2006/659 Sch. 2 para 3.3, and
// the OIML plan): their mean-check factors λ = t(0.995; n − 1)/√n against R's qt.
const PLAN_SIZES = [10, 13, 20, 30, 50, 60, 80, 100, 125, 160];

let R: Map<string, (number | null)[]>;

beforeAll(() => {
  const tasks: RTask[] = [];
  for (const c of tCases) {
    tasks.push({ kind: 'T', id: c.id, alternative: c.alternative, mu: c.mu, conf: 1 - c.alpha, x: c.x });
    if (new Set(c.x).size > 1) tasks.push({ kind: 'S', id: `s${c.id}`, x: c.x });
  }
  for (const c of wCases) tasks.push({ kind: 'W', id: c.id, alternative: c.alternative, mu: c.mu, exact: c.exact, x: c.x });
  for (const q of qGrid) tasks.push({ kind: 'Q', ...q });
  for (const p of pGrid) tasks.push({ kind: 'P', ...p });
  for (const n of PLAN_SIZES) tasks.push({ kind: 'Q', id: `lambda${n}`, p: 0.995, df: n - 1 });
  R = runR(tasks);
}, 120_000);

function rValues(id: string): (number | null)[] {
  const v = R.get(id);
  if (!v) throw new Error(`R returned nothing for ${id}`);
  return v;
}

describe('one-sample t test against R t.test', () => {
  it(`agrees on ${tCases.length} generated datasets: t and p to 1e-10 relative (1e-15 absolute for tiny p), bounds to 1e-10`, () => {
    for (const c of tCases) {
      const mine = tTest(c.x, { hypothesisedMean: c.mu, alternative: c.alternative, alpha: c.alpha });
      if (mine.value === null) throw new Error(`${c.id}: ${mine.reason}`);
      const [t, df, p, lo, hi] = rValues(c.id);
      const m = mine.value;
      expectClose(`${c.id} t`, m.statistic, t!, 1e-10);
      expect(m.degreesOfFreedom).toBe(df);
      expectClose(`${c.id} p`, m.pValue, p!, 1e-10, 1e-15);
      if (c.alternative !== 'less') expectClose(`${c.id} lower`, m.confidenceLower, lo!, 1e-10);
      else expect(lo).toBe(Number.NEGATIVE_INFINITY);
      if (c.alternative !== 'greater') expectClose(`${c.id} upper`, m.confidenceUpper, hi!, 1e-10);
      else expect(hi).toBe(Number.POSITIVE_INFINITY);
    }
  });
});

describe('Shapiro–Wilk against R shapiro.test', () => {
  it('agrees on every generated dataset with n 3 … 5000: W to 1e-8, p to 1e-6 relative', () => {
    let compared = 0;
    for (const c of tCases) {
      const r = R.get(`s${c.id}`);
      if (!r) continue;
      const mine = shapiroWilk(c.x);
      if (mine.value === null) throw new Error(`${c.id}: ${mine.reason}`);
      expectClose(`${c.id} W (n=${c.x.length}, ${c.shape})`, mine.value.statistic, r[0]!, 1e-8);
      expectClose(`${c.id} SW p (n=${c.x.length}, ${c.shape})`, mine.value.pValue, r[1]!, 1e-6, 1e-15);
      compared++;
    }
    expect(compared).toBeGreaterThan(200);
  });
});

describe('Wilcoxon signed-rank against R wilcox.test', () => {
  it('agrees on exact and approximate cases: V exactly, p to 1e-10 relative', () => {
    let exact = 0;
    let approx = 0;
    for (const c of wCases) {
      const mine = wilcoxonSignedRank(c.x, {
        hypothesisedMean: c.mu,
        alternative: c.alternative,
        ...(c.exact === null ? {} : { exact: c.exact }),
      });
      if (mine.value === null) throw new Error(`${c.id}: ${mine.reason}`);
      const [v, p, isExact] = rValues(c.id);
      expect(mine.value.statistic, `${c.id} V`).toBe(v);
      expect(mine.value.method === 'exact' ? 1 : 0, `${c.id} method`).toBe(isExact);
      expectClose(`${c.id} p`, mine.value.pValue, p!, 1e-10, 1e-15);
      if (isExact) exact++;
      else approx++;
    }
    expect(exact).toBeGreaterThan(20);
    expect(approx).toBeGreaterThan(40);
  });
});

describe('Student t distribution against R qt and pt', () => {
  it('quantiles agree with qt(p, df) to 1e-10 relative', () => {
    for (const q of qGrid) expectClose(`qt(${q.p}, ${q.df})`, studentTQuantile(q.p, q.df), rValues(q.id)[0]!, 1e-10, 1e-15);
  });
  it('the mean-check factor of every plan size agrees with qt(0.995, n - 1) / sqrt(n) to 1e-10 relative', () => {
    for (const n of PLAN_SIZES) expectClose(`λ(${n})`, meanCheckFactor(n), rValues(`lambda${n}`)[0]! / Math.sqrt(n), 1e-10);
    // The same arithmetic, to the three decimals tables print: Annex II 2.3.3 (n 20, 30, 50) and the
    // λ column of the OIML plan (n 10, 13, 80, 125; arithmetic on t, per the rules reference page).
    const printed = Object.fromEntries(PLAN_SIZES.map((n) => [n, (rValues(`lambda${n}`)[0]! / Math.sqrt(n)).toFixed(3)]));
    expect(printed).toMatchObject({ 10: '1.028', 13: '0.847', 20: '0.640', 30: '0.503', 50: '0.379', 80: '0.295', 125: '0.234' });
  });
  it('both tails agree with pt(t, df) to 1e-10 relative (1e-15 absolute for tiny tails)', () => {
    for (const p of pGrid) {
      const [lower, upper] = rValues(p.id);
      expectClose(`pt(${p.t}, ${p.df})`, studentTLowerTail(p.t, p.df), lower!, 1e-10, 1e-15);
      expectClose(`pt(${p.t}, ${p.df}, lower=FALSE)`, studentTUpperTail(p.t, p.df), upper!, 1e-10, 1e-15);
    }
  });
});
