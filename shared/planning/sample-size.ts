/**
 * Power and sample size of the one-sample t test, for the custom rulebook: the packs needed to
 * detect a shortfall θ of the mean with a given power at level α. The same definitions as R's
 * `power.t.test(type = "one.sample")` (stats package): with ν = n − 1, noncentrality = √n·θ/σ and
 * q = t(1 − α/k; ν) (k = 1 one-sided, 2 two-sided), power = P(T′ > q) for T′ noncentral t(ν, noncentrality),
 * plus P(T′ < −q) for a two-sided test when `strict` is set. The sample size is the n (real) at
 * which the power equals the target, found here by bisection to 1e-10 (R's uniroot with a tight
 * `tol` gives the same); the packs to measure are its ceiling.
 * Checked against R in tests/engine/planning-reference.test.ts.
 */
import { studentTQuantile, noncentralTLower, noncentralTUpper } from './distributions';
import { PlanningInputError } from './operating-characteristic';

export type Sides = 'one-sided' | 'two-sided';

export interface PowerInput {
  /** The shortfall of the mean to detect (> 0), in the unit of `sd`. */
  delta: number;
  /** Standard deviation of the pack contents (> 0). */
  sd: number;
  /** Significance level α in (0, 1). */
  alpha: number;
  alternative: Sides;
  /** Count the far tail of a two-sided test too (R's `strict = TRUE`); default false as in R. */
  strict?: boolean;
}

function check(i: PowerInput): void {
  if (!(Number.isFinite(i.delta) && i.delta > 0)) throw new PlanningInputError('delta must be a number above 0', 'delta');
  if (!(Number.isFinite(i.sd) && i.sd > 0)) throw new PlanningInputError('sd must be a number above 0', 'sd');
  if (!(i.alpha > 0 && i.alpha < 1)) throw new PlanningInputError('alpha must be between 0 and 1', 'alpha');
  if (i.alternative !== 'one-sided' && i.alternative !== 'two-sided') throw new PlanningInputError("alternative must be 'one-sided' or 'two-sided'", 'alternative');
}

function powerAt(n: number, i: PowerInput): number {
  const df = n - 1;
  const sides = i.alternative === 'two-sided' ? 2 : 1;
  const q = studentTQuantile(1 - i.alpha / sides, df);
  const noncentrality = (Math.sqrt(n) * i.delta) / i.sd;
  let p = noncentralTUpper(q, df, noncentrality);
  if (i.strict && sides === 2) p += noncentralTLower(-q, df, noncentrality);
  return p;
}

/** Power of the one-sample t test with n packs (n ≥ 2, may be fractional as in R). */
export function oneSampleTPower(input: PowerInput & { n: number }): number {
  check(input);
  if (!(Number.isFinite(input.n) && input.n >= 2)) throw new PlanningInputError('n must be a number of at least 2', 'n');
  return powerAt(input.n, input);
}

export const MAX_SAMPLE_SIZE = 1_000_000;

/** The sample size at which the one-sample t test has the given power: `n` real (as R reports it) and `packs` = ⌈n⌉. */
export function oneSampleTSampleSize(input: PowerInput & { power: number }): { n: number; packs: number; power: number } {
  check(input);
  if (!(input.power > 0 && input.power < 1)) throw new PlanningInputError('power must be between 0 and 1', 'power');
  let lo = 2;
  if (powerAt(lo, input) >= input.power) return { n: 2, packs: 2, power: powerAt(2, input) };
  let hi = 4;
  while (powerAt(hi, input) < input.power) {
    lo = hi;
    hi *= 2;
    if (hi > MAX_SAMPLE_SIZE) throw new PlanningInputError(`more than ${MAX_SAMPLE_SIZE} packs would be needed: delta is too small for this sd`, 'delta');
  }
  while (hi - lo > 1e-10 * Math.max(1, lo)) {
    const m = (lo + hi) / 2;
    if (powerAt(m, input) < input.power) lo = m;
    else hi = m;
  }
  const n = (lo + hi) / 2;
  const packs = Math.ceil(n - 1e-9);
  return { n, packs, power: powerAt(packs, input) };
}
