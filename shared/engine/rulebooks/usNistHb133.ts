/**
 * Rulebook `us-nist-hb133`: NIST Handbook 133 (2026), "Checking the Net Contents of Packaged
 * Goods", Chapter 2 (read) and Appendix A (not read) — markets.md §7.
 *
 * Read in Chapter 2:
 * - Average requirement: average error = Σ(net − labelled)/n. Category A (all packages except
 *   USDA-inspected meat and poultry at point of pack): the sample error limit SEL = s × SCF; the lot
 *   fails when the average error is negative and larger in size than the SEL (equality is not
 *   stated: here it passes, and the verdict says so). Category B: any negative average fails.
 * - Individual package requirement: packages short by more than the MAV ("unreasonable minus
 *   errors"); more than the plan allows fails the lot.
 * - Errors are computed against the nominal gross weight = average tare + labelled quantity (the
 *   tare modes 'fixed' and 'sample' do exactly that).
 * - Dual declarations: the larger of the two quantities is checked (param `otherDeclaration`).
 * - Scale division ≤ MAV/6 (a warning, the engine does not see the scale).
 * - Moisture allowance (Table 2-3), applied after the test by adding it to the SEL and the MAV
 *   (param `moistureAllowancePercent`; Category B: by lowering the nominal quantity).
 * - Two MAVs stated: 113 g → 7.2 g; 907 g → 31.7 g.
 *
 * FROM MEMORY; VERIFY (Appendix A not read): the Category A plan (sample sizes, SCF, allowed
 * unreasonable minus errors) and the MAV table by labelled weight. Every criterion that uses one
 * says so (`fromMemory`), and a product may enter its own MAV (`mav`) and plan (`plan`) from its copy
 * of the handbook: the verdict then cites the plant's entry.
 */
import type { Criterion, EngineError, LotInput, RulebookInfo, TneResult, Unit, UsRulebookParams } from '../types';
import type { Judgement, JudgeContext, Rulebook } from './types';
import { engineError } from '../errors';
import { formatNumber, formatQuantity } from '../format';
import { conversionFactor, dimensionOf, isUnit, largerDeclaration } from '../units';
import { countBelow, sampleSizeCriterion, t1Criterion } from './criteria';
import { studentTQuantile } from '../distributions/studentT';

const HB = 'NIST Handbook 133 (2026)';
const CH2 = `${HB} Chapter 2`;
const MEMORY = `${HB} Appendix A, from memory; verify`;
const P = '/product/rulebook/params';

export const US_NIST_HB133_INFO: RulebookInfo = {
  id: 'us-nist-hb133',
  version: '2026.1',
  title: 'United States net contents (NIST Handbook 133)',
  edition: 'NIST Handbook 133, 2026 edition: Chapter 2 read; Appendix A not read',
  market: 'United States',
  scope: { description: 'packages labelled by weight or volume in SI or US customary units (oz, lb, US fl oz, US gal)', units: ['mg', 'g', 'kg', 'mL', 'cL', 'L', 'oz', 'lb', 'fl oz', 'US gal'] },
  source: `${CH2} (average and individual package requirements, nominal gross weight, dual declarations, moisture allowances, scale division); Appendix A plan and MAV table from memory; verify`,
  provenance:
    'Chapter 2 read: the two requirements, SEL = s × SCF (Category A), no negative average (Category B), errors on the nominal gross weight, dual declarations, moisture allowances, scale division ≤ MAV/6, and two MAVs (113 g → 7.2 g; 907 g → 31.7 g). Appendix A not read: the Category A plan and the MAV table are from memory; verify. A product may enter its MAV and plan from its copy of the handbook.',
  verified: ['MAV 113 g → 7.2 g and 907 g → 31.7 g (Chapter 2)', 'average requirement: SEL = s × SCF (Category A); no negative average (Category B) (Chapter 2)', 'moisture allowances of Table 2-3 added to the SEL and the MAV (Chapter 2)'],
  fromMemory: [
    'Category A plan: lot 1 → 1; 2–10 → every package, SCF t(0.975; n − 1)/√n; 11 → 11, SCF 0.672; 12–250 → 12, 0.635, 0 allowed; 251–3 200 → 24, 0.422, 1; over 3 200 → 48, 0.290, 2',
    'MAV by labelled weight to 1 100 g (Appendix A Table 2-5 as remembered)',
  ],
  parameters: [
    { name: 'category', type: 'string', description: "'A' (default: all packages but USDA-inspected meat and poultry at point of pack) or 'B'", default: 'A', allowed: ['A', 'B'] },
    { name: 'mav', type: 'number', description: 'maximum allowable variation in the declared unit, from your copy of HB 133 Appendix A', default: null },
    { name: 'plan', type: 'object', description: '{ sampleSize, sampleCorrectionFactor, allowed }: the sampling plan from your copy of HB 133 Appendix A', default: null },
    { name: 'moistureAllowancePercent', type: 'number', description: 'moisture allowance of HB 133 Table 2-3, per cent of the labelled quantity (e.g. 3 for flour)', default: null },
    { name: 'otherDeclaration', type: 'object', description: '{ quantity, unit }: the other quantity of a dual declaration; the larger is judged', default: null },
  ],
};

const US_UNITS: readonly Unit[] = US_NIST_HB133_INFO.scope.units;

/** MAV by labelled weight in grams, (above, upTo] → MAV in grams (or 10 % of the labelled quantity). FROM MEMORY; VERIFY. */
export const US_MAV_BY_WEIGHT_FROM_MEMORY: readonly { above: number; upTo: number; mav: number | 'ten-percent' }[] = [
  { above: 0, upTo: 36, mav: 'ten-percent' },
  { above: 36, upTo: 54, mav: 3.6 },
  { above: 54, upTo: 81, mav: 5.4 },
  { above: 81, upTo: 117, mav: 7.2 },
  { above: 117, upTo: 154, mav: 9.0 },
  { above: 154, upTo: 208, mav: 10.8 },
  { above: 208, upTo: 263, mav: 12.6 },
  { above: 263, upTo: 317, mav: 14.4 },
  { above: 317, upTo: 381, mav: 16.2 },
  { above: 381, upTo: 426, mav: 18.0 },
  { above: 426, upTo: 489, mav: 19.8 },
  { above: 489, upTo: 571, mav: 21.7 },
  { above: 571, upTo: 635, mav: 23.5 },
  { above: 635, upTo: 698, mav: 25.4 },
  { above: 698, upTo: 771, mav: 27.2 },
  { above: 771, upTo: 852, mav: 29.0 },
  { above: 852, upTo: 970, mav: 31.7 },
  { above: 970, upTo: 1100, mav: 35.3 },
];

/** The two MAVs Chapter 2 states (labelled quantity → MAV, grams): checked values. */
export const US_MAV_STATED: readonly { labelled: number; mav: number }[] = [
  { labelled: 113, mav: 7.2 },
  { labelled: 907, mav: 31.7 },
];

export interface UsPlan {
  n: number;
  /** SCF; null when the plan takes one package (no spread). */
  scf: number | null;
  allowed: number;
  how: string;
  fromMemory: boolean;
}

/** Category A plan by lot size. FROM MEMORY; VERIFY (Appendix A not read). */
export function usPlanFromMemory(lotSize: number): UsPlan {
  const m = (n: number, scf: number | null, allowed: number, how: string): UsPlan => ({ n, scf, allowed, how: `${how} (${MEMORY})`, fromMemory: true });
  if (lotSize === 1) return m(1, null, 0, 'lot of 1: one package');
  if (lotSize <= 10) return m(lotSize, studentTQuantile(0.975, lotSize - 1) / Math.sqrt(lotSize), 0, `every package; SCF t(0.975; ${lotSize - 1})/√${lotSize}`);
  if (lotSize === 11) return m(11, 0.672, 0, 'lot of 11: 11 packages, SCF 0.672');
  if (lotSize <= 250) return m(12, 0.635, 0, 'lot 12–250: 12 packages, SCF 0.635');
  if (lotSize <= 3200) return m(24, 0.422, 1, 'lot 251–3 200: 24 packages, SCF 0.422');
  return m(48, 0.29, 2, 'lot over 3 200: 48 packages, SCF 0.290');
}

function paramsOf(input: LotInput): UsRulebookParams {
  return (input.product.rulebook.params ?? {}) as UsRulebookParams;
}

/** The MAV for a labelled quantity (declared unit), with where it comes from; an error when none is known. */
export function usMav(qn: number, unit: Unit, params: UsRulebookParams): { value: number; how: string; fromMemory: boolean } | { error: EngineError } {
  if (params.mav !== undefined) return { value: params.mav, how: `MAV ${formatQuantity(params.mav, unit)} as entered by the plant from its copy of ${HB} Appendix A`, fromMemory: false };
  if (dimensionOf(unit) !== 'mass') {
    return { error: engineError('parameter-required', `${HB}: the MAV of a package labelled by volume is not shipped here; enter it from your copy of Appendix A (mav)`, `${P}/mav`) };
  }
  const grams = qn * (conversionFactor(unit, 'g') as number);
  const toUnit = conversionFactor('g', unit) as number;
  const stated = US_MAV_STATED.find((s) => Math.abs(grams - s.labelled) < 0.5);
  if (stated) return { value: stated.mav * toUnit, how: `MAV ${formatNumber(stated.mav)} g for ${formatNumber(stated.labelled)} g, as ${CH2} states it`, fromMemory: false };
  const row = US_MAV_BY_WEIGHT_FROM_MEMORY.find((r) => grams > r.above && grams <= r.upTo);
  if (!row) {
    return { error: engineError('parameter-required', `${HB}: no MAV is shipped for ${formatNumber(grams)} g; enter it from your copy of Appendix A (mav)`, `${P}/mav`) };
  }
  const g = row.mav === 'ten-percent' ? grams / 10 : row.mav;
  return { value: g * toUnit, how: `MAV ${formatNumber(g)} g for a labelled ${formatNumber(grams)} g (${MEMORY})`, fromMemory: true };
}

function validatePositive(v: unknown, name: string): EngineError | null {
  return v === undefined || (typeof v === 'number' && Number.isFinite(v) && v > 0) ? null : engineError('invalid-parameter', `${name} must be a finite number > 0`, `${P}/${name}`);
}

function validate(input: LotInput): EngineError | null {
  const unit = input.product.unit;
  if (!US_UNITS.includes(unit)) {
    return engineError('unit-not-allowed', `us-nist-hb133: a declaration in ${unit} is not allowed in this market (allowed: ${US_UNITS.join(', ')})`, '/product/unit');
  }
  const p = paramsOf(input);
  if (p.category !== undefined && p.category !== 'A' && p.category !== 'B') return engineError('invalid-parameter', "category must be 'A' or 'B'", `${P}/category`);
  const e = validatePositive(p.mav, 'mav');
  if (e) return e;
  const ma = p.moistureAllowancePercent;
  if (ma !== undefined && !(typeof ma === 'number' && ma >= 0 && ma < 100)) {
    return engineError('invalid-parameter', 'moistureAllowancePercent must be a number from 0 to under 100', `${P}/moistureAllowancePercent`);
  }
  if (p.plan !== undefined) {
    const pl = p.plan as unknown as Record<string, unknown>;
    if (typeof pl !== 'object' || pl === null) return engineError('invalid-parameter', 'plan must be { sampleSize, sampleCorrectionFactor, allowed }', `${P}/plan`);
    if (!(Number.isInteger(pl.sampleSize) && (pl.sampleSize as number) >= 2)) return engineError('invalid-parameter', 'plan.sampleSize must be an integer ≥ 2', `${P}/plan/sampleSize`);
    if (!(typeof pl.sampleCorrectionFactor === 'number' && Number.isFinite(pl.sampleCorrectionFactor) && pl.sampleCorrectionFactor >= 0)) {
      return engineError('invalid-parameter', 'plan.sampleCorrectionFactor must be a finite number ≥ 0', `${P}/plan/sampleCorrectionFactor`);
    }
    if (!(Number.isInteger(pl.allowed) && (pl.allowed as number) >= 0)) return engineError('invalid-parameter', 'plan.allowed must be an integer ≥ 0', `${P}/plan/allowed`);
  }
  if (p.otherDeclaration !== undefined) {
    const o = p.otherDeclaration as unknown as Record<string, unknown>;
    if (typeof o !== 'object' || o === null) return engineError('invalid-parameter', 'otherDeclaration must be { quantity, unit }', `${P}/otherDeclaration`);
    if (!isUnit(o.unit) || !US_UNITS.includes(o.unit)) return engineError('unit-not-allowed', `otherDeclaration.unit must be one of ${US_UNITS.join(', ')}`, `${P}/otherDeclaration/unit`);
    if (dimensionOf(o.unit) !== dimensionOf(unit)) return engineError('invalid-parameter', 'a dual declaration states one quantity twice: otherDeclaration must be of the same kind (mass or volume) as the label', `${P}/otherDeclaration/unit`);
    const q = validatePositive(o.quantity, 'otherDeclaration/quantity');
    if (q || o.quantity === undefined) return q ?? engineError('invalid-parameter', 'otherDeclaration.quantity is required', `${P}/otherDeclaration/quantity`);
  }
  const mav = usMav(judgedNominal(input), unit, p);
  if ('error' in mav) return mav.error;
  if (input.lot.previousSample !== undefined) return engineError('second-sample-not-applicable', `${HB} judges one sample`, '/lot/previousSample');
  return null;
}

/** The labelled quantity judged: the larger of a dual declaration (Chapter 2), in the declared unit. */
function judgedNominal(input: LotInput): number {
  const { nominalQuantity: qn, unit } = input.product;
  const other = paramsOf(input).otherDeclaration;
  if (other === undefined) return qn;
  return largerDeclaration({ quantity: qn, unit }, other, unit) ?? qn;
}

function tneOf(qn: number, unit: Unit, params: UsRulebookParams | undefined): TneResult {
  const mav = usMav(qn, unit, params ?? {});
  if ('error' in mav) return { ok: false, reason: mav.error.message };
  return { ok: true, value: mav.value, unit, baseValue: mav.value, baseUnit: unit, rule: mav.how };
}

function judge(ctx: JudgeContext): Judgement | { error: EngineError } {
  const { input, net, unit, mean, standardDeviation: sd } = ctx;
  const p = paramsOf(input);
  const category = p.category ?? 'A';
  const qn = judgedNominal(input);
  const mav = usMav(qn, unit, p);
  if ('error' in mav) return { error: mav.error };
  const { lotSize } = input.lot;
  const plan: UsPlan = p.plan
    ? { n: p.plan.sampleSize, scf: p.plan.sampleCorrectionFactor, allowed: p.plan.allowed, how: `plan as entered by the plant from its copy of ${HB} Appendix A`, fromMemory: false }
    : usPlanFromMemory(lotSize);
  const required = Math.min(plan.n, lotSize);
  const n = net.length;
  const q = (v: number) => formatQuantity(v, unit);
  const allowance = p.moistureAllowancePercent !== undefined ? (qn * p.moistureAllowancePercent) / 100 : 0;
  const allowanceText = allowance > 0 ? ` + moisture allowance ${q(allowance)} (${p.moistureAllowancePercent} %, ${CH2} Table 2-3)` : '';
  const dual = qn !== input.product.nominalQuantity ? [`judged against ${q(qn)}, the larger quantity of the dual declaration (${CH2})`] : [];
  const memoryWarning = plan.fromMemory || mav.fromMemory ? [`${HB} Appendix A values used here (${[plan.fromMemory ? 'plan' : '', mav.fromMemory ? 'MAV' : ''].filter(Boolean).join(', ')}) are from memory; verify against your copy and enter them in the product (mav, plan)`] : [];
  const base = {
    meanTest: { hypothesisedMean: qn, alternative: 'less' as const, alpha: 0.025, unit },
    tne: { value: mav.value, baseValue: mav.value, baseUnit: unit },
    nominal: qn,
    warnings: [...dual, ...memoryWarning, `use a scale whose division does not exceed MAV/6 = ${q(mav.value / 6)} (${CH2})`],
  };
  const size = sampleSizeCriterion(n, required, `for a lot of ${lotSize} packages (${plan.how})`, plan.fromMemory ? MEMORY : `plant's entry (${HB} Appendix A)`, plan.fromMemory);
  if (n < required) return { ...base, criteria: [size], insufficient: true, additionalPacks: null };

  const averageError = mean - qn;
  let meanC: Criterion;
  if (category === 'A') {
    // More packages than the plan's: the SCF of the plan's n does not fit; t(0.975; n − 1)/√n is computed.
    const scf = n === plan.n && plan.scf !== null ? { value: plan.scf, how: plan.how, memo: plan.fromMemory } : { value: studentTQuantile(0.975, n - 1) / Math.sqrt(n), how: `SCF t(0.975; ${n - 1})/√${n} computed for the ${n} packages measured`, memo: false };
    const sel = sd * scf.value + allowance;
    const passed = !(averageError < 0 && -averageError > sel);
    meanC = {
      id: 'mean',
      observed: averageError,
      limit: -sel,
      passed,
      sentence: `average error ${q(averageError)} ${passed ? (averageError >= 0 ? 'is not negative' : 'is not larger in size than') : 'is negative and larger in size than'} the sample error limit SEL = s × SCF = ${q(sd)} × ${formatNumber(scf.value, 4)}${allowanceText} = ${q(sel)} (${scf.how}; an average error equal in size to the SEL passes: equality is not stated)`,
      clause: `${CH2} (average requirement, Category A)${scf.memo ? `; SCF ${MEMORY}` : ''}`,
      ...(scf.memo ? { fromMemory: true as const } : {}),
    };
  } else {
    const passed = averageError + allowance >= 0;
    meanC = {
      id: 'mean',
      observed: averageError,
      limit: -allowance,
      passed,
      sentence: `average error ${q(averageError)}${allowance > 0 ? ` with the moisture allowance ${q(allowance)}` : ''} is ${passed ? 'not negative' : 'negative'}: Category B allows no negative average`,
      clause: `${CH2} (average requirement, Category B)`,
    };
  }
  const lowLimit = qn - mav.value - allowance;
  const short = countBelow(net, lowLimit);
  const indiv = t1Criterion(
    short.count,
    lowLimit,
    mav.value + allowance,
    unit,
    plan.allowed,
    plan.allowed + 1,
    `unreasonable minus errors by the plan (${plan.how})`,
    `${CH2} (individual package requirement); ${mav.how}${plan.fromMemory ? `; allowed count ${MEMORY}` : ''}`,
    plan.fromMemory || mav.fromMemory,
    { limit: 'labelled − MAV', tne: allowance > 0 ? 'MAV + moisture allowance' : 'MAV' },
  );
  return { ...base, criteria: [size, meanC, indiv], insufficient: false, additionalPacks: null, belowT1Indices: short.indices, belowT2Indices: [], noT2: true };
}

export const usNistHb133: Rulebook = { info: US_NIST_HB133_INFO, validate, judge, tne: (qn, unit, params) => tneOf(qn, unit, params as UsRulebookParams | undefined) };
