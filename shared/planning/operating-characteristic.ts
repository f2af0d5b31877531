/**
 * Operating characteristic of a rulebook: the probability that a lot is accepted, as a function of
 * the process mean μ and standard deviation σ of the pack contents (normal), the lot size and the
 * testing kind. This first slice covers `eu-76-211` (Directive 76/211/EEC; its plans are read from
 * the rulebook's own tables in shared/engine/rulebooks/eu76211.ts, never copied here).
 *
 * Exact parts (each criterion alone):
 * - T1 count: packs below T1 = Qn − TNE in a sample of n are Binomial(n, p₁), p₁ = Φ((T1 − μ)/σ),
 *   for packs drawn from the process; for a finite lot known to hold D packs below T1 the count is
 *   hypergeometric (sampling without replacement). The double plan's T1 acceptance sums over the
 *   undecided first-stage counts: P = P(X₁ ≤ a₁) + Σ_{a₁<x<r₁} P(X₁ = x)·P(X₂ ≤ a₂ − x).
 * - Mean check x̄ ≥ Qn − λ·s alone: √n(x̄ − Qn)/s is noncentral t with n − 1 degrees of freedom and
 *   noncentrality √n(μ − Qn)/σ, so P(pass) = P(T ≥ −λ√n). For a lot checked in full (under 100),
 *   x̄ of all N packs is normal: P(x̄ ≥ Qn) = Φ(√N(μ − Qn)/σ).
 * - No pack below T2 in a sample of n: (1 − p₂)ⁿ.
 * Joint acceptance (mean, T1, T2 together, and the second stage of the double plan, which is judged
 * on both samples together) has no closed form; it is simulated with a seeded generator and
 * returned with its standard error √(P(1 − P)/lots). The simulated lot is judged by the engine's
 * own plan (`euPlan`), factor (`meanFactor` with the printed λ) and TNE (`EU_TNE` by `tneByTable`); a test
 * checks its decisions against `evaluateLot` itself (tests/engine/planning-oc.test.ts).
 */
import { standardNormalCdf, binomialCdf, binomialPmf, hypergeometricCdf, hypergeometricPmf, noncentralTUpper } from './distributions';
import { euPlan, EU_76_211_INFO, EU_PRINTED_FACTORS } from '../engine/rulebooks/eu76211';
import { EU_TNE, tneByTable } from '../engine/rulebooks/tne';
import { meanFactor } from '../engine/rulebooks/criteria';
import type { Unit } from '../engine/types';

export type Testing = 'destructive' | 'non-destructive';

export interface OcCase {
  rulebook: 'eu-76-211';
  nominalQuantity: number;
  unit: Unit;
  lotSize: number;
  testing: Testing;
  /** eu-76-211's parameter: the Directive's double plan (default) or the optional single plan. */
  nonDestructivePlan?: 'double' | 'single';
  /** Process mean μ of the net contents, in `unit`. */
  mean: number;
  /** Process standard deviation σ of the net contents, in `unit` (> 0). */
  sd: number;
}

/** The plan a lot is judged by, resolved to numbers. */
export type ResolvedPlan =
  | { kind: 'full'; n: number }
  | { kind: 'single'; n: number; accept: number; factor: number }
  | { kind: 'double'; n1: number; accept1: number; reject1: number; n2: number; accept2: number; factor1: number; factor2: number };

export interface Limits {
  tne: number;
  t1: number;
  t2: number;
}

export class PlanningInputError extends Error {
  constructor(
    message: string,
    /** The input field at fault (a name of `OcCase` or of the operation's own input). */
    readonly field: string,
  ) {
    super(message);
  }
}

/** T1, T2 and the TNE of a declaration under the rulebook; throws a PlanningInputError outside its scope. */
export function limitsOf(c: Pick<OcCase, 'nominalQuantity' | 'unit'>): Limits {
  if (!EU_76_211_INFO.scope.units.includes(c.unit)) throw new PlanningInputError(`eu-76-211: a declaration in ${String(c.unit)} is not allowed in this market`, 'unit');
  const r = tneByTable(c.nominalQuantity, c.unit, EU_TNE);
  if (!r.ok) throw new PlanningInputError(`eu-76-211: ${r.reason}`, 'nominalQuantity');
  return { tne: r.value, t1: c.nominalQuantity - r.value, t2: c.nominalQuantity - 2 * r.value };
}

/** The plan of eu-76-211 for the lot, as the engine resolves it. */
export function resolvePlan(c: Pick<OcCase, 'lotSize' | 'testing' | 'nonDestructivePlan'>): ResolvedPlan {
  const plan = euPlan(c.lotSize, c.testing, c.nonDestructivePlan ?? 'double');
  if (plan === null) throw new PlanningInputError('destructive testing is not used for lots under 100 packs (Directive 76/211/EEC Annex II 2.1)', 'testing');
  const factor = (n: number) => meanFactor(n, EU_PRINTED_FACTORS, 'Directive 76/211/EEC Annex II 2.3.3').value;
  if (plan.kind === 'full') return { kind: 'full', n: c.lotSize };
  // The engine measures max(plan n, mean-check n) packs and judges every one (averageSystem.ts).
  const n1 = Math.max(plan.first.n, plan.meanN);
  if (plan.kind === 'single') return { kind: 'single', n: n1, accept: plan.first.accept, factor: plan.factor ?? factor(n1) };
  const n2 = plan.second.n;
  return { kind: 'double', n1, accept1: plan.first.accept, reject1: plan.first.reject, n2, accept2: plan.second.accept, factor1: factor(n1), factor2: factor(n1 + n2) };
}

export function validateCase(c: OcCase): void {
  if (c.rulebook !== 'eu-76-211') throw new PlanningInputError(`no operating characteristic for rulebook ${JSON.stringify(c.rulebook)} yet (this slice: eu-76-211)`, 'rulebook');
  if (!Number.isFinite(c.mean)) throw new PlanningInputError('mean must be a finite number', 'mean');
  if (!(Number.isFinite(c.sd) && c.sd > 0)) throw new PlanningInputError('sd must be a finite number above 0', 'sd');
  if (!(Number.isInteger(c.lotSize) && c.lotSize >= 2 && c.lotSize <= 10_000_000)) throw new PlanningInputError('lotSize must be a whole number from 2 to 10 000 000', 'lotSize');
  if (c.testing !== 'destructive' && c.testing !== 'non-destructive') throw new PlanningInputError("testing must be 'destructive' or 'non-destructive'", 'testing');
  if (c.nonDestructivePlan !== undefined && c.nonDestructivePlan !== 'double' && c.nonDestructivePlan !== 'single') {
    throw new PlanningInputError("nonDestructivePlan must be 'double' or 'single'", 'nonDestructivePlan');
  }
  if (!(Number.isFinite(c.nominalQuantity) && c.nominalQuantity > 0)) throw new PlanningInputError('nominalQuantity must be a number above 0', 'nominalQuantity');
  limitsOf(c);
  resolvePlan(c);
}

/** P(a pack is below T1) and P(below T2) for the process. */
export function shortfallProbabilities(c: OcCase): { belowT1: number; belowT2: number } {
  const l = limitsOf(c);
  return { belowT1: standardNormalCdf((l.t1 - c.mean) / c.sd), belowT2: standardNormalCdf((l.t2 - c.mean) / c.sd) };
}

/** P(the T1 count alone accepts) for packs from the process (binomial), by the plan's stages. */
export function t1AcceptBinomial(plan: ResolvedPlan, p: number): number {
  if (plan.kind === 'full') return 1; // eu-76-211 sets no T1 allowance for a lot under 100 checked in full
  if (plan.kind === 'single') return binomialCdf(plan.accept, plan.n, p);
  let s = binomialCdf(plan.accept1, plan.n1, p);
  for (let x = plan.accept1 + 1; x < plan.reject1; x++) s += binomialPmf(x, plan.n1, p) * binomialCdf(plan.accept2 - x, plan.n2, p);
  return s;
}

/** P(the T1 count alone accepts) for a lot of N packs holding D below T1, sampled without replacement (hypergeometric). */
export function t1AcceptHypergeometric(plan: ResolvedPlan, lotSize: number, defectives: number): number {
  if (plan.kind === 'full') return 1;
  if (plan.kind === 'single') return hypergeometricCdf(plan.accept, lotSize, defectives, plan.n);
  let s = hypergeometricCdf(plan.accept1, lotSize, defectives, plan.n1);
  for (let x = plan.accept1 + 1; x < plan.reject1; x++) {
    const px = hypergeometricPmf(x, lotSize, defectives, plan.n1);
    if (px > 0) s += px * hypergeometricCdf(plan.accept2 - x, lotSize - plan.n1, defectives - x, plan.n2);
  }
  return s;
}

/** P(x̄ ≥ Qn − λ·s) on n packs from the process: the noncentral t (R: pt(−λ√n, n − 1, √n(μ − Qn)/σ, lower.tail = FALSE)). */
export function meanCheckProbability(n: number, factor: number, mean: number, sd: number, qn: number): number {
  const rn = Math.sqrt(n);
  return noncentralTUpper(-factor * rn, n - 1, (rn * (mean - qn)) / sd);
}

export interface ExactParts {
  belowT1: number;
  belowT2: number;
  /** P(the T1 criterion alone accepts), both stages of a double plan. */
  t1Accept: number;
  /** P(the mean check alone passes) on the first (or only) sample. */
  meanFirstSample: number;
  /** P(no pack below T2) in the first (or only) sample. */
  noT2FirstSample: number;
}

export function exactParts(c: OcCase): ExactParts {
  validateCase(c);
  const plan = resolvePlan(c);
  const { belowT1, belowT2 } = shortfallProbabilities(c);
  const n = plan.kind === 'double' ? plan.n1 : plan.n;
  const meanFirstSample =
    plan.kind === 'full' ? standardNormalCdf((Math.sqrt(plan.n) * (c.mean - c.nominalQuantity)) / c.sd) : meanCheckProbability(n, plan.kind === 'single' ? plan.factor : plan.factor1, c.mean, c.sd, c.nominalQuantity);
  return { belowT1, belowT2, t1Accept: t1AcceptBinomial(plan, belowT1), meanFirstSample, noT2FirstSample: Math.exp(n * Math.log1p(-belowT2)) };
}

/**
 * Seeded generator: xoshiro128** (Blackman & Vigna 2018, "Scrambled linear pseudorandom number
 * generators"), seeded by splitmix32, with Marsaglia's polar method for normals. Own code rather
 * than a package because a stored operating-characteristic point must recompute identically from
 * its seed in server and browser for as long as it is kept: a generator fixed by its publication
 * cannot change under a dependency update.
 */
export class SeededNormal {
  private s0: number;
  private s1: number;
  private s2: number;
  private s3: number;
  private spare: number | null = null;

  constructor(seed: number) {
    let x = seed >>> 0;
    const next = () => {
      x = (x + 0x9e3779b9) >>> 0;
      let z = x;
      z = Math.imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
      z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
      return (z ^ (z >>> 16)) >>> 0;
    };
    this.s0 = next();
    this.s1 = next();
    this.s2 = next();
    this.s3 = next();
    if ((this.s0 | this.s1 | this.s2 | this.s3) === 0) this.s0 = 1;
  }

  /** Next 32 random bits. */
  nextUint32(): number {
    const result = Math.imul(rotl(Math.imul(this.s1, 5), 7), 9) >>> 0;
    const t = this.s1 << 9;
    this.s2 ^= this.s0;
    this.s3 ^= this.s1;
    this.s1 ^= this.s2;
    this.s0 ^= this.s3;
    this.s2 ^= t;
    this.s3 = rotl(this.s3, 11);
    return result;
  }

  /** Uniform on [0, 1) with 53 random bits. */
  uniform(): number {
    const hi = this.nextUint32() >>> 5;
    const lo = this.nextUint32() >>> 6;
    return (hi * 67108864 + lo) / 9007199254740992;
  }

  /** Standard normal (Marsaglia & Bray 1964 polar method). */
  normal(): number {
    if (this.spare !== null) {
      const v = this.spare;
      this.spare = null;
      return v;
    }
    for (;;) {
      const u = 2 * this.uniform() - 1;
      const v = 2 * this.uniform() - 1;
      const s = u * u + v * v;
      if (s > 0 && s < 1) {
        const m = Math.sqrt((-2 * Math.log(s)) / s);
        this.spare = v * m;
        return u * m;
      }
    }
  }
}

function rotl(x: number, k: number): number {
  return ((x << k) | (x >>> (32 - k))) >>> 0;
}

export type LotOutcome = 'accepted-first' | 'rejected-first' | 'accepted-second' | 'rejected-second';

/**
 * The decision of eu-76-211 on net contents, as the engine takes it (shared/engine/rulebooks/averageSystem.ts):
 * `first` holds the first (or only) sample, `second` the second sample of a double plan (read only
 * when the first leaves the T1 count undecided and nothing else failed).
 */
export function judgeLot(plan: ResolvedPlan, limits: Limits, qn: number, first: Float64Array, second: () => Float64Array): LotOutcome {
  const s1 = summarise(first, limits);
  if (plan.kind === 'full') return s1.mean >= qn && s1.belowT2 === 0 ? 'accepted-first' : 'rejected-first';
  const f1 = plan.kind === 'single' ? plan.factor : plan.factor1;
  const failed = s1.mean < qn - f1 * s1.sd || s1.belowT2 > 0;
  if (plan.kind === 'single') return !failed && s1.belowT1 <= plan.accept ? 'accepted-first' : 'rejected-first';
  if (failed || s1.belowT1 >= plan.reject1) return 'rejected-first';
  if (s1.belowT1 <= plan.accept1) return 'accepted-first';
  const both = new Float64Array(first.length + plan.n2);
  both.set(first);
  both.set(second(), first.length);
  const s = summarise(both, limits);
  return s.mean >= qn - plan.factor2 * s.sd && s.belowT1 <= plan.accept2 && s.belowT2 === 0 ? 'accepted-second' : 'rejected-second';
}

function summarise(x: Float64Array, limits: Limits): { mean: number; sd: number; belowT1: number; belowT2: number } {
  let sum = 0;
  let b1 = 0;
  let b2 = 0;
  for (let i = 0; i < x.length; i++) {
    const v = x[i]!;
    sum += v;
    if (v < limits.t1) b1++;
    if (v < limits.t2) b2++;
  }
  const mean = sum / x.length;
  let ss = 0;
  for (let i = 0; i < x.length; i++) ss += (x[i]! - mean) ** 2;
  return { mean, sd: x.length > 1 ? Math.sqrt(ss / (x.length - 1)) : 0, belowT1: b1, belowT2: b2 };
}

export interface SimulationOptions {
  /** Simulated lots (default 20 000; at most 2 000 000). */
  lots?: number;
  /** Seed of the generator (default 1): the same seed gives the same lots (common random numbers across μ). */
  seed?: number;
}

export interface SimulatedAcceptance {
  probability: number;
  standardError: number;
  lots: number;
  seed: number;
  /** Share of simulated lots that needed the second sample of a double plan. */
  secondSampleShare: number;
}

export const DEFAULT_LOTS = 20_000;
export const MAX_LOTS = 2_000_000;

function simulationSettings(o: SimulationOptions): { lots: number; seed: number } {
  const lots = o.lots ?? DEFAULT_LOTS;
  const seed = o.seed ?? 1;
  if (!(Number.isInteger(lots) && lots >= 100 && lots <= MAX_LOTS)) throw new PlanningInputError(`lots must be a whole number from 100 to ${MAX_LOTS}`, 'lots');
  if (!(Number.isInteger(seed) && seed >= 0 && seed <= 0xffffffff)) throw new PlanningInputError('seed must be a whole number from 0 to 4294967295', 'seed');
  return { lots, seed };
}

/**
 * Standard-normal draws for the simulated lots, generated once per seed so that a curve over μ
 * (and the bisection of the target) uses common random numbers: pack i of lot k is μ + σ·zᵢₖ.
 */
export interface LotDraws {
  plan: ResolvedPlan;
  lots: number;
  seed: number;
  /** lots × (first-sample packs + second-sample packs). */
  z: Float64Array;
  perLot: number;
  firstN: number;
}

export function drawLots(plan: ResolvedPlan, options: SimulationOptions = {}): LotDraws {
  const { lots, seed } = simulationSettings(options);
  const firstN = plan.kind === 'double' ? plan.n1 : plan.n;
  const perLot = firstN + (plan.kind === 'double' ? plan.n2 : 0);
  const rng = new SeededNormal(seed);
  const z = new Float64Array(lots * perLot);
  for (let i = 0; i < z.length; i++) z[i] = rng.normal();
  return { plan, lots, seed, z, perLot, firstN };
}

/** The joint acceptance probability at (μ, σ) over pre-drawn lots. */
export function acceptanceFromDraws(c: OcCase, draws: LotDraws): SimulatedAcceptance {
  const limits = limitsOf(c);
  const { plan, lots, perLot, firstN, z } = draws;
  let accepted = 0;
  let second = 0;
  const first = new Float64Array(firstN);
  const secondN = perLot - firstN;
  for (let k = 0; k < lots; k++) {
    const base = k * perLot;
    for (let i = 0; i < firstN; i++) first[i] = c.mean + c.sd * z[base + i]!;
    const outcome = judgeLot(plan, limits, c.nominalQuantity, first, () => {
      const s = new Float64Array(secondN);
      for (let i = 0; i < secondN; i++) s[i] = c.mean + c.sd * z[base + firstN + i]!;
      return s;
    });
    if (outcome === 'accepted-first' || outcome === 'accepted-second') accepted++;
    if (outcome === 'accepted-second' || outcome === 'rejected-second') second++;
  }
  const p = accepted / lots;
  return { probability: p, standardError: Math.sqrt((p * (1 - p)) / lots), lots, seed: draws.seed, secondSampleShare: second / lots };
}

/** Joint acceptance probability by seeded simulation. */
export function simulateAcceptance(c: OcCase, options: SimulationOptions = {}): SimulatedAcceptance {
  validateCase(c);
  return acceptanceFromDraws(c, drawLots(resolvePlan(c), options));
}

export interface OcPoint {
  mean: number;
  sd: number;
  plan: ResolvedPlan;
  limits: Limits;
  exact: ExactParts;
  simulated: SimulatedAcceptance;
}

/** One point of the operating characteristic: the exact parts and the simulated joint probability. */
export function operatingCharacteristicPoint(c: OcCase, options: SimulationOptions = {}): OcPoint {
  validateCase(c);
  const plan = resolvePlan(c);
  return { mean: c.mean, sd: c.sd, plan, limits: limitsOf(c), exact: exactParts(c), simulated: acceptanceFromDraws(c, drawLots(plan, options)) };
}

export const MAX_GRID_POINTS = 10_000;

/** The curve over a grid of process means (one σ), with common random numbers across the grid. */
export function operatingCharacteristicCurve(c: Omit<OcCase, 'mean'>, means: readonly number[], options: SimulationOptions = {}): OcPoint[] {
  if (means.length === 0 || means.length > MAX_GRID_POINTS) throw new PlanningInputError(`means must hold 1 to ${MAX_GRID_POINTS} process means`, 'means');
  means.forEach((m, i) => {
    if (!Number.isFinite(m)) throw new PlanningInputError('every mean must be a finite number', `means/${i}`);
  });
  validateCase({ ...c, mean: means[0]! });
  const plan = resolvePlan(c);
  const draws = drawLots(plan, options);
  const limits = limitsOf(c);
  return means.map((mean) => {
    const point = { ...c, mean };
    return { mean, sd: c.sd, plan, limits, exact: exactParts(point), simulated: acceptanceFromDraws(point, draws) };
  });
}
