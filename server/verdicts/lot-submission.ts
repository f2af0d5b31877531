// Submitting a lot: find the product (or the first sample a second sample completes), judge the
// measurements with the engine, and hand the verdict to the ledger to be sealed. Nothing is stored
// for a lot the engine refuses. Fields of a failure are the submission's ("/measurements/17"); the
// HTTP side (lot-request.ts) says where they were in the request.
import { randomUUID } from 'node:crypto';
import type { Sequelize } from 'sequelize';
import { evaluateLot, type LotInput } from '../../shared/engine';
import type { components } from '../../shared/api/schema';
import type { Config } from '../config';
import { Refused, TooLarge } from '../core/errors';
import { findPrior, replayOrRefuse, type IdempotencyClaim } from '../core/idempotency';
import type { Principal } from '../core/principal';
import { recordLotUsage } from '../metering/usage';
import { appendVerdict, type AppendOutcome } from './ledger';
import { firstSampleLot, productField, productForLot } from './lot-product';
import { loadFirstSample, secondSampleLot } from './second-sample';
import { assembleVerdict } from './verdict-assembly';
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
  const org = principal.organisationId;
  const first = sub.firstSampleVerdictId ? await loadFirstSample(sequelize, org, sub.firstSampleVerdictId) : null;
  const product = await productForLot(sequelize, org, sub, first);
  const { spec, lot, lotCode } = first ? secondSampleLot(first, sub) : firstSampleLot(product, sub);

  const input: LotInput = { product: spec, lot };
  const judged = evaluateLot(input);
  if (!judged.ok) throw engineFailure(judged.error, productField(sub, first));

  const pending = assembleVerdict(
    {
      verdictId: randomUUID(),
      organisationId: org,
      product,
      input,
      lotCode,
      line: sub.line ?? (first ? first.record.lot.line : null),
      packedAt: sub.packedAt ? new Date(sub.packedAt).toISOString() : first ? first.record.lot.packedAt : null,
      clientReference: sub.clientReference ?? null,
      source,
      first,
      result: judged.verdict,
    },
    claim,
  );
  const outcome = await appendVerdict(sequelize, config, pending);
  if (outcome.kind === 'created') await recordLotUsage(principal, lot.measurements.length).catch(() => {});
  return outcome;
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
