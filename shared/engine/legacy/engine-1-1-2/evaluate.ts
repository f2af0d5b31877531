/**
 * FROZEN: engine 1.1.2 as it judged lots until issue 17 (commit b59be04), kept so that a record
 * sealed with it recomputes as sealed (see ../kept-engines.ts). Never edit this folder: a change
 * here changes what old seals mean. Only its imports were moved to reach the shared statistics.
 *
 * evaluateLot: product spec and lot measurements in, verdict out. Pure and deterministic: the
 * same input always gives the same verdict (no clocks, no randomness), so a stored verdict can be
 * recomputed from its input and the engine version.
 */
import type { Criterion, Decision, EngineResult, LotInput, Verdict } from './types';
/** The version this frozen copy is: it never changes. */
const ENGINE_VERSION = '1.1.2';
import { engineError } from '../../errors';
import { toNet, validateInput } from '../../net';
import { rulebookFor } from './rulebooks/registry';
import { meanTestCriterion } from './rulebooks/criteria';
import { describeSeries } from '../../stats/describe';
import { tTestFromSummary, zTestFromSummary } from '../../inference/meanTest';
import { assumptionChecks } from '../../assumptions/checks';
import { baseUnitOf } from '../../units';

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
  if (judged.meanTestCriterionAt !== undefined) criteria.splice(judged.meanTestCriterionAt, 0, meanTestCriterion(test.value));

  const tne = judged.tne;
  const t1Limit = tne === null ? null : qn - tne.value;
  const t2Limit = tne === null ? null : qn - 2 * tne.value;
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
      nominalQuantity: qn,
      tolerableNegativeError: tne === null ? null : tne.value,
      tolerableNegativeErrorBase: tne === null ? null : tne.baseValue,
      baseUnit: baseUnitOf(unit),
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
    },
    caution: CAUTION,
  };
  return { ok: true, verdict };
}
