// Submitting a lot: find the product, judge the measurements with the engine, and append the
// sealed verdict to the organisation's ledger. Nothing is stored for a lot the engine refuses.
import { createHash } from 'node:crypto';
import { QueryTypes, type Sequelize } from 'sequelize';
import { ENGINE_VERSION, evaluateLot, type LotData, type LotInput, type ProductSpec, type Verdict as EngineVerdict } from '../../shared/engine';
import type { components, operations } from '../../shared/api/schema';
import type { Config } from '../config';
import { ConflictProblem, PayloadTooLargeProblem, UnprocessableProblem, ValidationProblem, type InvalidParam } from '../http/problem';
import { freshReads, preparedRows } from '../db/raw';
import { appendVerdict, keyReusedProblem, newVerdictId, SUBMIT_OPERATION, type AppendOutcome } from './ledger';
import { readCsvLot } from './lot-csv';
import type { Principal } from './principal';
import { specOf } from './products';
import { writeNumberArraysAside } from './canonical-aside';
import { canonicalContentParts, RECORD_FORMAT, type RecordContent, type VerdictRecord } from './verdict-records';
import { recordLotUsage } from './usage';

export type LotSubmission = components['schemas']['LotSubmission'];
export const MAX_MEASUREMENTS = 1_000_000;

/** Lot fields of a text/csv submission, as query parameters (generated from the OpenAPI document). */
export type CsvQuery = NonNullable<operations['submitLot']['parameters']['query']>;

export type LotRequest =
  | { kind: 'json'; body: LotSubmission; /** the body's bytes as received, when it came over HTTP */ raw?: Buffer; query: Record<string, unknown> }
  | { kind: 'csv'; text: string; query: CsvQuery };

interface Normalised {
  sub: LotSubmission;
  source: VerdictRecord['lot']['source'];
  /** Where each lot field came from: "/body/…" for JSON, "/query/…" for CSV. */
  fieldPointer: (field: string) => string;
  /** Pointer and wording for the i-th measurement (or tare). */
  valuePointer: (field: 'measurements' | 'tares', i: number) => { pointer: string; where: string; line?: number };
}

async function normalise(req: LotRequest): Promise<Normalised> {
  if (req.kind === 'json') {
    const extra = Object.keys(req.query);
    if (extra.length > 0) {
      throw new ValidationProblem(`query parameters are only read with a text/csv body; put ${extra.join(', ')} in the JSON body`, extra.map((k) => ({ pointer: `/query/${k}`, detail: 'only for text/csv bodies' })));
    }
    if (req.body.measurements.length > MAX_MEASUREMENTS) throw tooMany(req.body.measurements.length);
    return {
      sub: req.body,
      source: { format: 'json' },
      fieldPointer: (f) => `/body/${f}`,
      valuePointer: (f, i) => ({ pointer: `/body/${f}/${i}`, where: `${f}[${i}]` }),
    };
  }
  const q = req.query;
  if (!q.column) throw new ValidationProblem('a text/csv lot needs ?column=<header of the measurement column>', [{ pointer: '/query/column', detail: 'required with text/csv' }]);
  let csv;
  try {
    csv = await readCsvLot(req.text, q.column, q.tareColumn ?? null, MAX_MEASUREMENTS);
  } catch (err) {
    if ((err as { tooMany?: boolean }).tooMany) throw tooMany(MAX_MEASUREMENTS + 1);
    throw err;
  }
  const sub: LotSubmission = {
    measurementUnit: q.measurementUnit as LotSubmission['measurementUnit'],
    measurements: csv.measurements,
    ...(csv.tares ? { tares: csv.tares } : {}),
  };
  for (const k of ['productId', 'sku', 'lotCode', 'line', 'packedAt', 'lotSize', 'testing', 'measurementBasis', 'clientReference', 'firstSampleVerdictId'] as const) {
    if (q[k] !== undefined) (sub as Record<string, unknown>)[k] = q[k];
  }
  if (!sub.measurementUnit) throw new ValidationProblem('a text/csv lot needs ?measurementUnit=', [{ pointer: '/query/measurementUnit', detail: 'required with text/csv' }]);
  const { lines } = csv;
  return {
    sub,
    source: { format: 'csv', sha256: createHash('sha256').update(req.text, 'utf8').digest('hex'), column: q.column, tareColumn: q.tareColumn ?? null },
    fieldPointer: (f) => `/query/${f}`,
    valuePointer: (f, i) => ({ pointer: '/body', where: `CSV line ${lines[i] ?? '?'} (column ${JSON.stringify(f === 'tares' ? q.tareColumn : q.column)})`, line: lines[i] }),
  };
}

function tooMany(n: number): PayloadTooLargeProblem {
  return new PayloadTooLargeProblem(`the lot has ${n > MAX_MEASUREMENTS ? `more than ${MAX_MEASUREMENTS}` : n} measurements; at most ${MAX_MEASUREMENTS.toLocaleString('en')} are accepted per lot`);
}

/** The fingerprint an Idempotency-Key is bound to: the body's bytes as sent (and for CSV the query). */
function requestHash(req: LotRequest): string {
  const h = createHash('sha256');
  if (req.kind === 'json') h.update('json\n').update(req.raw ?? JSON.stringify(req.body));
  else h.update('csv\n').update(JSON.stringify(Object.entries(req.query).sort())).update('\n').update(req.text);
  return h.digest('hex');
}

interface ProductRow {
  id: string;
  sku: string;
  name: string;
  nominal_quantity: number;
  unit: string;
  tare_mode: string;
  fixed_tare: number | null;
  tare_unit: string | null;
  density: number | null;
  rulebook: { id: string; params?: Record<string, unknown> };
  alert_recipients: string[];
  organisation_name: string;
  archived: boolean;
}

const PRODUCT_SELECT = `SELECT p.id, p.sku, p.name, p.nominal_quantity, p.unit, p.tare_mode, p.fixed_tare, p.tare_unit, p.density, p.rulebook,
            p.alert_recipients, o.name AS organisation_name, p.archived_at IS NOT NULL AS archived
     FROM products p JOIN organisations o ON o.id = p.organisation_id
     WHERE p.organisation_id = $1`;
const PRODUCT_BY_ID = `${PRODUCT_SELECT} AND p.id = $2`;
const PRODUCT_BY_SKU = `${PRODUCT_SELECT} AND p.sku = $2 AND p.archived_at IS NULL`;

// Concurrent submissions naming one product share a read issued after each of them arrived.
const productReaders = new WeakMap<Sequelize, (key: string) => Promise<ProductRow[]>>();
function productReader(sequelize: Sequelize): (key: string) => Promise<ProductRow[]> {
  let r = productReaders.get(sequelize);
  if (!r) {
    r = freshReads((key) => {
      const a = key.indexOf('\n');
      const b = key.indexOf('\n', a + 1);
      const [by, org, value] = [key.slice(0, a), key.slice(a + 1, b), key.slice(b + 1)];
      return by === 'id'
        ? preparedRows<ProductRow>(sequelize, 'lotproof-product-by-id', PRODUCT_BY_ID, [org, value])
        : preparedRows<ProductRow>(sequelize, 'lotproof-product-by-sku', PRODUCT_BY_SKU, [org, value]);
    });
    productReaders.set(sequelize, r);
  }
  return r;
}

interface FirstSampleRow {
  id: string;
  decision: string;
  seal: string;
  product_id: string;
  record: string;
}

function invalid(detail: string, errors: InvalidParam[]): UnprocessableProblem {
  return new UnprocessableProblem(detail, 'lot-not-judged', { errors });
}

/** Replays a stored reply for this key, or says the key was used for another body. */
async function priorReply(sequelize: Sequelize, organisationId: string, key: string, hash: string): Promise<AppendOutcome | null> {
  const rows = await preparedRows<{ request_hash: string; status: number; response: string }>(
    sequelize,
    'lotproof-idempotent-submit',
    'SELECT request_hash, status, response FROM idempotency_records WHERE organisation_id = $1 AND operation = $2 AND key = $3',
    [organisationId, SUBMIT_OPERATION, key],
  );
  const r = rows[0];
  if (!r) return null;
  if (r.request_hash !== hash) throw keyReusedProblem();
  return { kind: 'replayed', status: r.status, body: r.response };
}

export async function submitLot(
  sequelize: Sequelize,
  config: Config,
  principal: Principal,
  req: LotRequest,
  idempotencyKey: string | null,
): Promise<AppendOutcome> {
  const org = principal.organisationId;
  const hash = idempotencyKey ? requestHash(req) : null;
  if (idempotencyKey && hash) {
    const prior = await priorReply(sequelize, org, idempotencyKey, hash);
    if (prior) return prior;
  }
  const { sub, source, fieldPointer, valuePointer } = await normalise(req);

  // The first sample, when this is a second one: it fixes the product spec and the lot's data.
  let first: { row: FirstSampleRow; record: VerdictRecord } | null = null;
  if (sub.firstSampleVerdictId) {
    const rows = await sequelize.query<FirstSampleRow>(
      'SELECT id, decision, seal, product_id, record FROM verdicts WHERE id = $1 AND organisation_id = $2',
      { bind: [sub.firstSampleVerdictId, org], type: QueryTypes.SELECT },
    );
    const row = rows[0];
    if (!row) throw invalid(`no verdict ${sub.firstSampleVerdictId} in your organisation`, [{ pointer: fieldPointer('firstSampleVerdictId'), detail: 'unknown verdict' }]);
    if (row.decision !== 'second-sample-required') {
      throw new ConflictProblem(`verdict ${row.id} is ${row.decision}; only a second-sample-required verdict takes a second sample`, 'not-awaiting-second-sample');
    }
    first = { row, record: JSON.parse(row.record) as VerdictRecord };
  }

  const productId = sub.productId ?? first?.row.product_id;
  if (!productId && !sub.sku) {
    throw new ValidationProblem('name the product with productId or sku', [{ pointer: fieldPointer('sku'), detail: 'productId or sku is required' }]);
  }
  const products = await productReader(sequelize)(`${productId ? 'id' : 'sku'}\n${org}\n${productId ?? sub.sku}`);
  // An archived product takes no new lot (reads answer 404 for it too); a second sample still
  // completes the check its first sample started.
  const archived = !first && products[0]?.archived === true;
  const product = archived ? undefined : products[0];
  if (!product || (sub.sku && product.sku !== sub.sku) || (first && product.id !== first.row.product_id)) {
    const which = productId && !first ? 'productId' : 'sku';
    const detail = first && product && product.id !== first.row.product_id
      ? `the first sample was of another product`
      : archived
        ? `product ${JSON.stringify(products[0]!.id)} is archived; an archived product takes no new lots`
        : `no product ${JSON.stringify(productId && !first ? productId : sub.sku)} in your organisation`;
    throw invalid(detail, [{ pointer: fieldPointer(which), detail }]);
  }

  let spec: ProductSpec;
  let lot: LotData;
  let lotCode: string;
  if (first) {
    const fl = first.record.input.lot;
    spec = first.record.input.product;
    const mismatches: InvalidParam[] = [];
    const same = (field: 'lotSize' | 'testing' | 'measurementUnit' | 'measurementBasis', mine: unknown, theirs: unknown) => {
      if (mine !== undefined && theirs !== undefined && mine !== theirs) {
        mismatches.push({ pointer: fieldPointer(field), detail: `the first sample has ${field} ${JSON.stringify(theirs)}` });
      }
    };
    same('lotSize', sub.lotSize, fl.lotSize);
    same('testing', sub.testing, fl.testing);
    same('measurementUnit', sub.measurementUnit, fl.measurementUnit);
    same('measurementBasis', sub.measurementBasis, fl.measurementBasis);
    if (sub.lotCode !== undefined && sub.lotCode !== first.record.lot.lotCode) {
      mismatches.push({ pointer: fieldPointer('lotCode'), detail: `the first sample is of lot ${JSON.stringify(first.record.lot.lotCode)}` });
    }
    if (mismatches.length > 0) throw invalid('a second sample must be of the same lot, measured the same way', mismatches);
    lotCode = first.record.lot.lotCode;
    lot = {
      lotSize: fl.lotSize,
      testing: fl.testing,
      measurementUnit: fl.measurementUnit,
      ...(fl.measurementBasis ? { measurementBasis: fl.measurementBasis } : {}),
      measurements: sub.measurements,
      ...(sub.tares ? { tares: sub.tares } : {}),
      ...(sub.tareSample ? { tareSample: sub.tareSample } : fl.tareSample ? { tareSample: fl.tareSample } : {}),
      previousSample: [...(fl.previousSample ?? []), ...fl.measurements],
      ...(fl.tares ? { previousTares: [...(fl.previousTares ?? []), ...fl.tares] } : {}),
    };
  } else {
    const missing = (['lotCode', 'lotSize', 'testing'] as const).filter((k) => sub[k] === undefined);
    if (missing.length > 0) {
      throw new ValidationProblem(`missing ${missing.join(', ')}`, missing.map((k) => ({ pointer: fieldPointer(k), detail: 'required' })));
    }
    spec = specOf({
      nominalQuantity: product.nominal_quantity,
      unit: product.unit as ProductSpec['unit'],
      tareMode: product.tare_mode as ProductSpec['tareMode'],
      fixedTare: product.fixed_tare,
      tareUnit: product.tare_unit as ProductSpec['unit'] | null,
      density: product.density,
      rulebook: product.rulebook as never,
    });
    lotCode = sub.lotCode!;
    lot = {
      lotSize: sub.lotSize!,
      testing: sub.testing!,
      measurementUnit: sub.measurementUnit,
      ...(sub.measurementBasis ? { measurementBasis: sub.measurementBasis } : {}),
      measurements: sub.measurements,
      ...(sub.tares ? { tares: sub.tares } : {}),
      ...(sub.tareSample ? { tareSample: sub.tareSample } : {}),
    };
  }

  const input: LotInput = { product: spec, lot };
  // A big lot's numbers are written as canonical JSON on a worker thread while the engine runs here.
  const aside = writeNumberArraysAside([lot.measurements, lot.tares, lot.previousSample, lot.previousTares]);
  const judged = evaluateLot(input);
  if (!judged.ok) throw engineProblem(judged.error, { fieldPointer, valuePointer, productField: productId && !first ? 'productId' : 'sku' });
  const result: EngineVerdict = judged.verdict;

  const verdictId = newVerdictId();
  const line = sub.line ?? (first ? first.record.lot.line : null);
  const packedAt = sub.packedAt ? new Date(sub.packedAt).toISOString() : first ? first.record.lot.packedAt : null;
  const clientReference = sub.clientReference ?? null;
  const content: RecordContent = {
    format: RECORD_FORMAT,
    verdictId,
    organisation: { id: org, name: product.organisation_name },
    product: { id: product.id, sku: product.sku, name: product.name },
    lot: { lotCode, line, packedAt, clientReference, source },
    firstSample: first ? { verdictId: first.row.id, seal: first.row.seal } : null,
    input,
    engine: { version: ENGINE_VERSION },
    rulebook: { id: result.rulebook.id, version: result.rulebook.version },
    result,
  };
  const outcome = await appendVerdict(sequelize, config, {
    verdictId,
    organisationId: org,
    parts: canonicalContentParts(content, await aside),
    row: {
      id: verdictId,
      organisation_id: org,
      product_id: product.id,
      product_sku: product.sku,
      product_name: product.name,
      product_spec: spec as never,
      lot_code: lotCode,
      line,
      packed_at: packedAt,
      lot_size: lot.lotSize,
      testing: lot.testing,
      measurement_unit: lot.measurementUnit,
      measurement_count: lot.measurements.length,
      client_reference: clientReference,
      source_format: source.format,
      first_sample_verdict_id: first ? first.row.id : null,
      decision: result.decision,
      result: result as never,
      engine_version: ENGINE_VERSION,
      rulebook_id: result.rulebook.id,
      rulebook_version: result.rulebook.version,
    },
    idempotency: idempotencyKey && hash ? { key: idempotencyKey, requestHash: hash } : null,
    alertRecipients: product.alert_recipients ?? [],
  });
  if (outcome.kind === 'created') {
    await recordLotUsage(principal, lot.measurements.length).catch(() => {});
  }
  return outcome;
}

/** Maps an engine error's pointer into the LotInput onto the request the client sent. */
function engineProblem(
  error: { code: string; message: string; pointer: string },
  where: { fieldPointer: (f: string) => string; valuePointer: Normalised['valuePointer']; productField: string },
): UnprocessableProblem {
  const p = error.pointer;
  let pointer: string;
  let detail = error.message;
  let line: number | undefined;
  const value = /^\/lot\/(measurements|tares)\/(\d+)$/.exec(p);
  if (value) {
    const v = where.valuePointer(value[1] as 'measurements' | 'tares', Number(value[2]));
    pointer = v.pointer;
    line = v.line;
    detail = `${v.where}: ${error.message}`;
  } else if (p.startsWith('/lot/previous')) {
    pointer = where.fieldPointer('firstSampleVerdictId');
    detail = `the first sample: ${error.message}`;
  } else if (p.startsWith('/lot/')) {
    pointer = where.fieldPointer(p.slice('/lot/'.length).split('/')[0]!);
  } else if (error.code === 'density-required') {
    pointer = where.fieldPointer('measurementUnit');
    detail = `${error.message}; measure in the product's unit or give the product a density`;
  } else if (p.startsWith('/product')) {
    pointer = where.fieldPointer(where.productField);
    detail = `the product's spec (${p.slice('/product/'.length) || 'spec'}): ${error.message}`;
  } else {
    pointer = where.fieldPointer('measurements');
  }
  return new UnprocessableProblem(`The lot cannot be judged: ${detail}`, 'lot-not-judged', {
    code: error.code,
    errors: [{ pointer, detail, ...(line !== undefined ? { line } : {}) }],
  });
}
