/**
 * Rulebook `custom`: a plant's own acceptance rules, or a national rule not shipped yet (e.g. a
 * maximum-allowable-variation rule, entered as a lower individual limit Qn − MAV with its allowed
 * count). The mean criterion is a one-sample t test (or z test when the process standard
 * deviation is known) at the chosen α and alternative: the lot fails it when the test rejects H0.
 * Defaults: α = 0.05 and a 'less' alternative (common practice for a plant's own checks).
 * The rulebook has no TNE, so it gives no tare-sample warning (that limit is a fraction of the TNE).
 */
import type { Criterion, CustomRulebookParams, EngineError, LotInput, RulebookInfo } from '../types';
import type { Judgement, JudgeContext, Rulebook } from './types';
import { engineError } from '../errors';
import { countAbove, countBelow, sampleSizeCriterion } from './criteria';
import { formatQuantity } from '../format';
import { EU_TNE, tneByTable } from './tne';

export const CUSTOM_INFO: RulebookInfo = {
  id: 'custom',
  version: '1.0',
  title: 'Custom acceptance rules',
  source: 'set by the organisation; one-sample t test (Student 1908) or z test at the chosen significance level',
  edition: 'the organisation’s own rules',
  market: 'any (the organisation’s own rules)',
  scope: { description: 'any quantity; no TNE', units: ['mg', 'g', 'kg', 'mL', 'cL', 'L', 'oz', 'lb', 'fl oz', 'US gal', 'imp fl oz', 'imp gal', 'count'] },
  provenance: 'The rules are the parameters the organisation enters; the defaults (α = 0.05, alternative less) are common practice.',
  verified: [],
  fromMemory: [],
  parameters: [
    { name: 'alpha', type: 'number', description: 'significance level of the mean test, in (0, 1)', default: 0.05 },
    { name: 'alternative', type: 'string', description: 'alternative hypothesis of the mean test', default: 'less', allowed: ['less', 'greater', 'two-sided'] },
    { name: 'hypothesisedMean', type: 'number', description: 'hypothesised mean in the declared unit', default: null },
    { name: 'knownStandardDeviation', type: 'number', description: 'known process standard deviation in the declared unit; switches to a z test', default: null },
    { name: 'lowerLimit', type: 'object', description: '{ value, allowed }: packs below value (declared unit) count against allowed', default: null },
    { name: 'upperLimit', type: 'object', description: '{ value, allowed }: packs above value (declared unit) count against allowed', default: null },
    { name: 'minimumSampleSize', type: 'integer', description: 'smallest sample for a decision (at least 2)', default: 2 },
  ],
};

const P = '/product/rulebook/params';

function validateLimit(v: unknown, name: string): EngineError | null {
  if (v === undefined) return null;
  if (typeof v !== 'object' || v === null) return engineError('invalid-parameter', `${name} must be { value, allowed }`, `${P}/${name}`);
  const { value, allowed } = v as { value?: unknown; allowed?: unknown };
  if (typeof value !== 'number' || !Number.isFinite(value)) {
    return engineError('invalid-parameter', `${name}.value must be a finite number`, `${P}/${name}/value`);
  }
  if (typeof allowed !== 'number' || !Number.isInteger(allowed) || allowed < 0) {
    return engineError('invalid-parameter', `${name}.allowed must be an integer ≥ 0`, `${P}/${name}/allowed`);
  }
  return null;
}

function validate(input: LotInput): EngineError | null {
  const p: CustomRulebookParams = input.product.rulebook.params ?? {};
  if (typeof p !== 'object' || p === null) return engineError('invalid-parameter', 'params must be an object', P);
  if (p.alpha !== undefined && !(typeof p.alpha === 'number' && p.alpha > 0 && p.alpha < 1)) {
    return engineError('invalid-parameter', 'alpha must lie strictly between 0 and 1', `${P}/alpha`);
  }
  if (p.alternative !== undefined && !['less', 'greater', 'two-sided'].includes(p.alternative)) {
    return engineError('invalid-parameter', "alternative must be 'less', 'greater' or 'two-sided'", `${P}/alternative`);
  }
  if (p.hypothesisedMean !== undefined && !(typeof p.hypothesisedMean === 'number' && Number.isFinite(p.hypothesisedMean))) {
    return engineError('invalid-parameter', 'hypothesisedMean must be a finite number', `${P}/hypothesisedMean`);
  }
  if (
    p.knownStandardDeviation !== undefined &&
    !(typeof p.knownStandardDeviation === 'number' && Number.isFinite(p.knownStandardDeviation) && p.knownStandardDeviation > 0)
  ) {
    return engineError('invalid-parameter', 'knownStandardDeviation must be a finite number > 0', `${P}/knownStandardDeviation`);
  }
  if (
    p.minimumSampleSize !== undefined &&
    !(typeof p.minimumSampleSize === 'number' && Number.isInteger(p.minimumSampleSize) && p.minimumSampleSize >= 2)
  ) {
    return engineError('invalid-parameter', 'minimumSampleSize must be an integer ≥ 2', `${P}/minimumSampleSize`);
  }
  const l = validateLimit(p.lowerLimit, 'lowerLimit') ?? validateLimit(p.upperLimit, 'upperLimit');
  if (l) return l;
  if (input.lot.previousSample !== undefined) {
    return engineError('second-sample-not-applicable', 'the custom rulebook has no double sampling plan', '/lot/previousSample');
  }
  return null;
}

function limitCriterion(
  id: 'lower-limit' | 'upper-limit',
  count: number,
  limit: { value: number; allowed: number },
  unit: JudgeContext['unit'],
): Criterion {
  const passed = count <= limit.allowed;
  const side = id === 'lower-limit' ? 'below' : 'above';
  return {
    id,
    observed: count,
    limit: limit.allowed,
    passed,
    sentence: `${count === 1 ? '1 pack' : `${count} packs`} ${side} ${formatQuantity(limit.value, unit)}: ${passed ? 'within' : 'more than'} the ${limit.allowed} allowed`,
    clause: `the organisation’s custom rules (${id === 'lower-limit' ? 'lowerLimit' : 'upperLimit'})`,
  };
}

function judge(ctx: JudgeContext): Judgement {
  const { input, net, unit, qn } = ctx;
  const p: CustomRulebookParams = input.product.rulebook.params ?? {};
  const minimum = p.minimumSampleSize ?? 2;
  const meanTest = {
    hypothesisedMean: p.hypothesisedMean ?? qn,
    alternative: p.alternative ?? 'less',
    alpha: p.alpha ?? 0.05,
    unit,
    ...(p.knownStandardDeviation !== undefined ? { knownStandardDeviation: p.knownStandardDeviation } : {}),
  };
  const size = sampleSizeCriterion(net.length, minimum, 'by the organisation’s custom rules', 'the organisation’s custom rules (minimumSampleSize)');
  const base = { meanTest, tne: null, warnings: [] as string[], additionalPacks: null };
  if (net.length < minimum) return { ...base, criteria: [size], insufficient: true };
  const criteria: Criterion[] = [size];
  // The mean criterion is the mean test's conclusion: the evaluator inserts it here once the test has run.
  const meanTestCriterionAt = criteria.length;
  if (p.lowerLimit) criteria.push(limitCriterion('lower-limit', countBelow(net, p.lowerLimit.value, 0).count, p.lowerLimit, unit));
  if (p.upperLimit) criteria.push(limitCriterion('upper-limit', countAbove(net, p.upperLimit.value), p.upperLimit, unit));
  return { ...base, criteria, insufficient: false, meanTestCriterionAt, meanTestClause: 'the organisation’s custom rules (alpha, alternative, hypothesisedMean); Student (1908) t test or z test' };
}

// The EU table, for information only (a preview of the product form): the custom rulebook judges by no TNE.
export const custom: Rulebook = { info: CUSTOM_INFO, validate, judge, tne: (qn, unit) => tneByTable(qn, unit, EU_TNE) };
