/**
 * evaluateLot: product spec and lot measurements in, verdict out — one market's decision, with its
 * criteria (each with its clause), warnings and the rulebook's source. A lot shipped to several
 * markets is judged by calling it once per rulebook with the same lot (see `evaluateLotForMarkets`). Pure and deterministic: the
 * same input always gives the same verdict (no clocks, no randomness), so a stored verdict can be
 * recomputed from its input and the engine version.
 */
import type { Criterion, Decision, EngineResult, LotInput, Verdict } from './types';
import { ENGINE_VERSION } from './version';
import { engineError } from './errors';
import { toNet, validateInput } from './net';
import { rulebookFor } from './rulebooks/registry';
import { meanTestCriterion } from './rulebooks/criteria';
import { describeSeries } from './stats/describe';
import { tTestFromSummary, zTestFromSummary } from './inference/meanTest';
import { assumptionChecks } from './assumptions/checks';
import { baseUnitOf } from './units';

const CAUTION =
  'This verdict is a statistical aid to a release decision, not a legal certificate: the packer’s responsible person decides release, and local weights-and-measures law and the competent authority prevail where they differ from this rulebook.';

function decide(criteria: Criterion[], insufficient: boolean, additional: number | null): Decision {
  if (insufficient) return 'insufficient-data';
  if (criteria.some((c) => c.passed === false)) return 'nonconforming';
  if (additional !== null || criteria.some((c) => c.passed === null)) return 'second-sample-required';
  return 'conforming';
}

export function evaluateLot(input: LotInput): EngineResult {
  const bad = validateInput(input);
  if (bad) return { ok: false, error: bad };
  const rulebook = rulebookFor(input.product.rulebook.id);
  if (rulebook === null) {
    return {
      ok: false,
      error: engineError('unknown-rulebook', `unknown rulebook ${JSON.stringify(input.product.rulebook.id)}`, '/product/rulebook/id'),
    };
  }
  const ruleErr = rulebook.validate(input);
  if (ruleErr) return { ok: false, error: ruleErr };
  const converted = toNet(input);
  if (!converted.ok) return converted;
  const { net } = converted.data;
  const unit = input.product.unit;
  const qn = input.product.nominalQuantity;
  const described = describeSeries(net, unit);
  const { descriptive } = described;
  const sd = descriptive.standardDeviation ?? 0;

  const judged = rulebook.judge({
    input,
    net,
    previousCount: converted.data.previousCount,
    currentCount: converted.data.currentCount,
    unit,
    qn,
    mean: descriptive.mean,
    standardDeviation: sd,
    tareSampleStandardDeviation: converted.data.tareSampleStandardDeviation,
    tareMean: converted.data.tareMean,
    tareSampleCount: converted.data.tareSampleCount,
  });
  if ('error' in judged) return { ok: false, error: judged.error };

  const { knownStandardDeviation, ...testOpts } = judged.meanTest;
  const summary = { n: net.length, mean: descriptive.mean, standardDeviation: sd };
  const test =
    knownStandardDeviation !== undefined
      ? zTestFromSummary(summary, knownStandardDeviation, testOpts)
      : tTestFromSummary(summary, testOpts);
  if (test.value === null) {
    return { ok: false, error: engineError('test-not-computable', test.reason, '/lot/measurements') };
  }

  const criteria = judged.criteria.slice();
  if (judged.meanTestCriterionAt !== undefined) {
    criteria.splice(judged.meanTestCriterionAt, 0, meanTestCriterion(test.value, judged.meanTestClause ?? rulebook.info.source));
  }

  const tne = judged.tne;
  const nominal = judged.nominal ?? qn;
  const t1Limit = tne === null ? null : nominal - tne.value;
  const t2Limit = tne === null || judged.noT2 ? null : nominal - 2 * tne.value;
  const decision = decide(criteria, judged.insufficient, judged.additionalPacks);

  const verdict: Verdict = {
    decision,
    ...(decision === 'second-sample-required' && judged.additionalPacks !== null
      ? { secondSample: { additionalPacks: judged.additionalPacks } }
      : {}),
    criteria,
    statistics: { descriptive, meanTest: test.value },
    assumptions: assumptionChecks(net, descriptive, testOpts, { minIndex: described.minIndex, maxIndex: described.maxIndex }),
    net: {
      unit,
      nominalQuantity: nominal,
      tolerableNegativeError: tne === null ? null : tne.value,
      tolerableNegativeErrorBase: tne === null ? null : tne.baseValue,
      baseUnit: tne === null ? baseUnitOf(unit) : tne.baseUnit,
      t1Limit,
      t2Limit,
      count: net.length,
      tareApplied: converted.data.tareApplied,
      tareMean: converted.data.tareMean,
      belowT1Indices: judged.belowT1Indices ?? [],
      belowT2Indices: judged.belowT2Indices ?? [],
    },
    warnings: judged.warnings.slice(),
    engineVersion: ENGINE_VERSION,
    rulebook: {
      id: rulebook.info.id,
      version: rulebook.info.version,
      title: rulebook.info.title,
      source: rulebook.info.source,
      edition: rulebook.info.edition,
      market: rulebook.info.market,
    },
    caution: CAUTION,
  };
  return { ok: true, verdict };
}

/**
 * One lot judged under each of several rulebooks (the markets a product ships to): a loop over
 * `evaluateLot`, the product's spec taken with each rulebook choice in turn. Each entry is that
 * market's own result — a verdict with its decision, criteria, warnings and sources, or the
 * engine's refusal — in the order of `choices`. Combining them into an overall decision is the
 * caller's (the strictest of the decisions).
 */
export function evaluateLotForMarkets(input: LotInput, choices: readonly LotInput['product']['rulebook'][]): { rulebook: LotInput['product']['rulebook']; result: EngineResult }[] {
  return choices.map((rulebook) => ({ rulebook, result: evaluateLot({ product: { ...input.product, rulebook }, lot: input.lot }) }));
}
