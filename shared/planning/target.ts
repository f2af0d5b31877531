/**
 * Target quantity: the lowest process mean μ at which a lot passes with a chosen probability
 * (default 0.99), for a product, a lot size, a testing kind and a process standard deviation σ;
 * found by bisection on the simulated operating characteristic. The simulation uses common random
 * numbers (pack i of lot k is μ + σ·zᵢₖ for the same z at every μ), and under them the rulebook's
 * decision is monotone in μ (every count below T1/T2 can only fall and x̄ − (Qn − λs) only rise as
 * μ rises), so the simulated curve is a non-decreasing step function and the bisection is sound.
 * Beside it: the overfill per pack (μ − Qn) and its cost per year from the throughput and the cost
 * of the product per kilogram (per litre for a volume declaration), both entered by the user.
 */
import { baseFactor, dimensionOf } from '../engine/units';
import {
  acceptanceFromDraws,
  drawLots,
  exactParts,
  PlanningInputError,
  resolvePlan,
  validateCase,
  type ExactParts,
  type OcCase,
  type SimulatedAcceptance,
  type SimulationOptions,
} from './operating-characteristic';

export const DEFAULT_PASS_PROBABILITY = 0.99;

export interface TargetInput extends Omit<OcCase, 'mean'> {
  /** The chosen probability that a lot passes, in (0, 1); default 0.99. */
  probability?: number;
  /** Bisection tolerance on μ in the declared unit; default σ/1000. */
  tolerance?: number;
}

export interface TargetResult {
  /** Lowest μ (within `tolerance`) with simulated P(accept) ≥ probability. */
  mean: number;
  probability: number;
  /** The simulated acceptance at the target. */
  simulated: SimulatedAcceptance;
  /** The exact parts at the target (each criterion alone). */
  exact: ExactParts;
  /** μ − Qn per pack, in the declared unit (negative when the target lies below Qn). */
  overfillPerPack: number;
  tolerance: number;
  /** Set when the target lies below Qn: what the packer must weigh beside the probability. */
  note?: string;
}

export function targetQuantity(input: TargetInput, options: SimulationOptions = {}): TargetResult {
  const p = input.probability ?? DEFAULT_PASS_PROBABILITY;
  if (!(typeof p === 'number' && p > 0 && p < 1)) throw new PlanningInputError('probability must be between 0 and 1 (exclusive)', 'probability');
  validateCase({ ...input, mean: input.nominalQuantity });
  const tol = input.tolerance ?? input.sd / 1000;
  if (!(Number.isFinite(tol) && tol > 0)) throw new PlanningInputError('tolerance must be a number above 0', 'tolerance');
  const draws = drawLots(resolvePlan(input), options);
  const at = (mean: number) => acceptanceFromDraws({ ...input, mean }, draws);
  const qn = input.nominalQuantity;
  // Bracket: lo with P < p, hi with P ≥ p, stepping out by σ.
  let hi = qn;
  let step = input.sd;
  let guard = 0;
  while (at(hi).probability < p) {
    hi += step;
    step *= 2;
    if (++guard > 60) throw new PlanningInputError('no process mean reaches this probability with the simulated lots; lower the probability or raise lots', 'probability');
  }
  let lo = hi - input.sd;
  step = input.sd;
  guard = 0;
  while (at(lo).probability >= p) {
    hi = lo;
    lo -= step;
    step *= 2;
    if (++guard > 60) throw new PlanningInputError('the probability is reached at every process mean tried', 'probability');
  }
  while (hi - lo > tol) {
    const m = (lo + hi) / 2;
    if (at(m).probability >= p) hi = m;
    else lo = m;
  }
  const result: TargetResult = { mean: hi, probability: p, simulated: at(hi), exact: exactParts({ ...input, mean: hi }), overfillPerPack: hi - qn, tolerance: tol };
  if (hi < qn) {
    result.note =
      'this process mean is below the nominal quantity: the sampling plan would pass most such lots, but the packer’s first rule asks that the contents be not less than Qn on average (Directive 76/211/EEC Annex I 1.1); set the filler at Qn or above';
  }
  return result;
}

export interface OverfillCostInput {
  /** Process mean μ, in `unit`. */
  mean: number;
  nominalQuantity: number;
  unit: OcCase['unit'];
  /** Packs filled per year (≥ 0). */
  packsPerYear: number;
  /** Cost of the product per kilogram (per litre for a volume declaration), in the user's currency (≥ 0). */
  costPerKg: number;
}

export interface OverfillCost {
  overfillPerPack: number;
  /** Kilograms (litres) given away per year: (μ − Qn) × packs. Negative when μ < Qn. */
  quantityPerYear: number;
  costPerYear: number;
}

/** Overfill per pack and its cost per year; the currency is the one the user enters the cost in. */
export function overfillCost(i: OverfillCostInput): OverfillCost {
  if (dimensionOf(i.unit) === 'count') throw new PlanningInputError('a cost per kilogram needs a mass or volume declaration', 'unit');
  if (!(Number.isFinite(i.packsPerYear) && i.packsPerYear >= 0)) throw new PlanningInputError('packsPerYear must be a number of at least 0', 'packsPerYear');
  if (!(Number.isFinite(i.costPerKg) && i.costPerKg >= 0)) throw new PlanningInputError('costPerKg must be a number of at least 0', 'costPerKg');
  if (!Number.isFinite(i.mean)) throw new PlanningInputError('mean must be a finite number', 'mean');
  const overfillPerPack = i.mean - i.nominalQuantity;
  // baseFactor: grams (millilitres) in one unit; 1000 of them make a kilogram (litre).
  const quantityPerYear = (overfillPerPack * baseFactor(i.unit) * i.packsPerYear) / 1000;
  return { overfillPerPack, quantityPerYear, costPerYear: quantityPerYear * i.costPerKg };
}
