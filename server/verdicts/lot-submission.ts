// Submitting a lot: find the product (or the first sample a second sample completes), check that
// the lot may be judged (lot-judgements.ts: once, unless a second sample or a re-test), check the
// packs' plausibility and judge the measurements with the engine (a big lot on the aside thread, aside-tasks.ts), and hand the
// verdict to the ledger to be sealed. Nothing is stored for a lot the engine refuses. Fields of a
// failure are the submission's ("/measurements/17"); the HTTP side (lot-request.ts) says where
// they were in the request. A lot's number arrays may be Float64Arrays (a big JSON body's, a CSV's).
import { randomUUID } from 'node:crypto';
import type { Sequelize } from 'sequelize';
import type { LotInput } from '../../shared/engine';
import type { components } from '../../shared/api/schema';
import type { Config } from '../config';
import { runAside } from '../core/aside-thread';
import { InvalidInput, Refused, TooLarge } from '../core/errors';
import { findPrior, replayOrRefuse, type IdempotencyClaim } from '../core/idempotency';
import type { Principal } from '../core/principal';
import { recordLotUsage } from '../metering/usage';
import { appendVerdict, type AppendOutcome } from './ledger';
import { latestJudgement, loadRetestTarget, lotRefusal } from './lot-judgements';
import type { PlausibilityRecord } from '../../shared/plausibility';
import { firstSampleLot, plausibilityBand, productField, productForLot } from './lot-product';
import { submitterOf } from './lot-submitter';
import { loadFirstSample, secondSampleLot } from './second-sample';
import { judgeLot, JUDGE_ASIDE_MIN_VALUES, lotArrays, pendingFromAside, type LotToJudge } from './aside-tasks';
import type { VerdictRecord } from './verdict-records';

export type LotSubmission = components['schemas']['LotSubmission'];
export const MAX_MEASUREMENTS = 1_000_000;
export const SUBMIT_OPERATION = 'submitLot';

/** A lot as submitted, whatever it came as (JSON, or CSV with its fields as query parameters). */
export interface SubmittedLot {
  sub: LotSubmission;
  source: VerdictRecord['lot']['source'];
}

export function tooManyMeasurements(n: number): TooLarge {
  return new TooLarge(`the lot has ${n > MAX_MEASUREMENTS ? `more than ${MAX_MEASUREMENTS}` : n} measurements; at most ${MAX_MEASUREMENTS.toLocaleString('en')} are accepted per lot`);
}

/** The stored reply of a key seen before (checked again under the ledger lock), or null. */
export async function priorSubmission(sequelize: Sequelize, claim: IdempotencyClaim | null): Promise<AppendOutcome | null> {
  const prior = claim && (await findPrior(sequelize, claim));
  if (!prior || !claim) return null;
  const r = replayOrRefuse(prior, claim);
  return { kind: 'replayed', status: r.status, body: r.body };
}

export async function submitLot(
  sequelize: Sequelize,
  config: Config,
  principal: Principal,
  { sub, source }: SubmittedLot,
  claim: IdempotencyClaim | null,
): Promise<AppendOutcome> {
  if (sub.measurements.length > MAX_MEASUREMENTS) throw tooManyMeasurements(sub.measurements.length);
  if (sub.firstSampleVerdictId && sub.retest) {
    throw new InvalidInput('a lot is a second sample (firstSampleVerdictId) or a re-test (retest), not both', [
      { field: '/retest', detail: 'not with firstSampleVerdictId: a second sample completes its first sample' },
    ]);
  }
  const org = principal.organisationId;
  const [first, submittedBy] = await Promise.all([
    sub.firstSampleVerdictId ? loadFirstSample(sequelize, org, sub.firstSampleVerdictId) : null,
    submitterOf(sequelize, principal),
  ]);
  const product = await productForLot(sequelize, org, sub, first);
  const { spec, lot, lotCode } = first ? secondSampleLot(first, sub) : firstSampleLot(product, sub);
  const retest = sub.retest ? { ...(await loadRetestTarget(sequelize, org, sub.retest.of, product, lotCode)), reason: sub.retest.reason } : null;
  // Checked here so that a refused lot costs no judging; checked again under the ledger lock.
  const refusal = lotRefusal({ lotCode, firstSampleId: first?.id ?? null, retestOf: retest?.id ?? null }, await latestJudgement(sequelize, org, product.id, lotCode));
  if (refusal) {
    // A retry of the request that judged this lot (its key's reply stored since this one arrived) replays that reply.
    const replay = await priorSubmission(sequelize, claim);
    if (replay) return replay;
    throw refusal;
  }

  const input: LotInput = { product: spec, lot };
  const measurementCount = lot.measurements.length;
  const toJudge: LotToJudge = {
    verdictId: randomUUID(),
    organisationId: org,
    product,
    input,
    lotCode,
    line: sub.line ?? (first ? first.record.lot.line : null),
    packedAt: sub.packedAt ? new Date(sub.packedAt).toISOString() : first ? first.record.lot.packedAt : null,
    clientReference: sub.clientReference ?? null,
    source,
    first: first ? { id: first.id, seal: first.seal } : null,
    retest,
    submittedBy,
    band: plausibilityBand(product),
    confirmImplausible: sub.confirmImplausible === true,
  };
  // A big lot is judged and its record's parts built on the aside thread (its arrays moved there,
  // unusable here afterwards); a small one right here, by the same function.
  const arrays = lotArrays(input);
  const judged =
    arrays.values >= JUDGE_ASIDE_MIN_VALUES ? await runAside(judgeLot, { lot: toJudge, claim }, arrays.buffers) : judgeLot.run({ lot: toJudge, claim }).value;
  if (!judged.ok) throw judged.implausible ? implausibleFailure(judged.implausible) : engineFailure(judged.error, productField(sub, first));
  const pending = pendingFromAside(judged.pending);
  const outcome = await appendVerdict(sequelize, config, pending);
  if (outcome.kind === 'created') await recordLotUsage(principal, measurementCount).catch(() => {});
  return outcome;
}

/** Packs named one by one in a refusal's fields. */
const IMPLAUSIBLE_FIELDS = 20;

const shown = (v: number) => String(Number(v.toPrecision(12)));

/** Packs outside the plausible band, each named ("/measurements/17"), with the band and the way to confirm them. */
function implausibleFailure({ check, net }: { check: PlausibilityRecord; net: number[] }): Refused {
  const band = `${shown(check.lower)}–${shown(check.upper)} ${check.unit} net, ${check.minFraction}–${check.maxFraction} × the nominal quantity`;
  const fields = check.implausiblePacks.slice(0, IMPLAUSIBLE_FIELDS).map((i, k) => ({
    field: `/measurements/${i}`,
    detail: `measurements[${i}] is ${shown(net[k]!)} ${check.unit} net, outside the plausible band ${band}`,
  }));
  const n = check.implausibleCount;
  const firstPack = check.implausiblePacks[0]!;
  const detail =
    `${n === 1 ? '1 pack is' : `${n} packs are`} outside the plausible band for this product (${band}), first measurements[${firstPack}] ` +
    `at ${shown(net[0]!)} ${check.unit}. Nothing was sealed. Check the values; if they are right, submit again with confirmImplausible set to true.`;
  const { minFraction, maxFraction, lower, upper, unit, implausibleCount } = check;
  return new Refused('implausible-measurement', detail, fields, { plausibility: { minFraction, maxFraction, lower, upper, unit, implausibleCount } });
}

/**
 * An engine error as a failure of the submission: its pointer into the engine's input
 * ("/lot/measurements/3", "/product/rulebook/params/x") becomes the submitted field that caused it.
 */
function engineFailure(error: { code: string; message: string; pointer: string }, product: 'productId' | 'sku'): Refused {
  const p = error.pointer;
  let field: string;
  let detail = error.message;
  const value = /^\/lot\/(measurements|tares)\/(\d+)$/.exec(p);
  if (value) {
    field = `/${value[1]}/${value[2]}`;
    detail = `${value[1]}[${value[2]}]: ${error.message}`;
  } else if (p.startsWith('/lot/previous')) {
    field = '/firstSampleVerdictId';
    detail = `the first sample: ${error.message}`;
  } else if (p.startsWith('/lot/')) {
    field = `/${p.slice('/lot/'.length).split('/')[0]!}`;
  } else if (error.code === 'density-required') {
    field = '/measurementUnit';
    detail = `${error.message}; measure in the product's unit or give the product a density`;
  } else if (p.startsWith('/product')) {
    field = `/${product}`;
    detail = `the product's spec (${p.slice('/product/'.length) || 'spec'}): ${error.message}`;
  } else {
    field = '/measurements';
  }
  return new Refused('lot-not-judged', `The lot cannot be judged: ${detail}`, [{ field, detail }], { code: error.code });
}
