// The HTTP side of submitting a lot: a JSON body, or a text/csv body with the lot's fields as query
// parameters, made into one submitted lot; and every failure of the submission told in the
// request's own terms — "/body/measurements/17" for JSON, "/query/lotCode" and "CSV line 19" for CSV.
import { createHash } from 'node:crypto';
import { setImmediate as nextTurn } from 'node:timers/promises';
import type { Request } from 'express';
import type { Sequelize } from 'sequelize';
import type { operations } from '../../shared/api/schema';
import type { Config } from '../config';
import { Failure } from '../core/errors';
import { failureProblem, ValidationProblem, type LocateField } from '../http/problem';
import { numberArraysSetAside } from '../http/request-body';
import { idempotencyClaim } from '../http/replies';
import type { AppendOutcome } from './ledger';
import { readCsvLot } from './lot-csv.http';
import { MAX_MEASUREMENTS, priorSubmission, submitLot, SUBMIT_OPERATION, tooManyMeasurements, type LotSubmission, type SubmittedLot } from './lot-submission';

/** Lot fields of a text/csv submission, as query parameters (generated from the OpenAPI document). */
type CsvQuery = NonNullable<operations['submitLot']['parameters']['query']>;

const CSV_FIELDS = ['productId', 'sku', 'lotCode', 'line', 'packedAt', 'lotSize', 'testing', 'measurementBasis', 'clientReference', 'firstSampleVerdictId', 'confirmImplausible'] as const;

/** A re-test's two parts, which a JSON body gives as `retest: { of, reason }`, as query parameters. */
function csvRetest(q: CsvQuery): LotSubmission['retest'] | undefined {
  if (q.retestOf === undefined && q.retestReason === undefined) return undefined;
  const missing = q.retestOf === undefined ? 'retestOf' : q.retestReason === undefined ? 'retestReason' : null;
  if (missing) throw new ValidationProblem('a re-test needs both retestOf (the verdict it re-tests) and retestReason', [{ pointer: `/query/${missing}`, detail: 'required with a re-test' }]);
  return { of: q.retestOf!, reason: q.retestReason! };
}

interface RequestedLot {
  lot: SubmittedLot;
  /** Where a field of the submission was in the request, and how its detail reads there. */
  locate: LocateField;
  /** The detail of a failure, reworded as `locate` rewords its fields. */
  reword: (text: string) => string;
}

/** The JSON body as the submitted lot; query parameters go only with a CSV body. */
function jsonLot(req: Request): RequestedLot {
  const extra = Object.keys(req.query);
  if (extra.length > 0) {
    throw new ValidationProblem(`query parameters are only read with a text/csv body; put ${extra.join(', ')} in the JSON body`, extra.map((k) => ({ pointer: `/query/${k}`, detail: 'only for text/csv bodies' })));
  }
  const sub = req.body as LotSubmission;
  // A big body's number arrays were parsed and checked on the aside thread (http/request-body.ts)
  // and left out of the body the validator saw; they go back in as the Float64Arrays they came as.
  const setAside = numberArraysSetAside(req);
  if (setAside) Object.assign(sub, setAside);
  if (sub.measurements.length > MAX_MEASUREMENTS) throw failureProblem(tooManyMeasurements(sub.measurements.length), req);
  return { lot: { sub, source: { format: 'json' } }, locate: (x) => ({ pointer: `/body${x.field}`, detail: x.detail }), reword: (t) => t };
}

/** Bytes hashed between two turns of the event loop: SHA-256 of a 28 MiB CSV at once held it for 20–40 ms. */
const HASH_SLICE = 1 << 20;

/** SHA-256 of the bytes, in hex, giving the event loop back between slices. */
async function sha256InSlices(bytes: Buffer): Promise<string> {
  const h = createHash('sha256');
  for (let at = 0; at < bytes.length; at += HASH_SLICE) {
    await nextTurn(); // (from an I/O callback the first runs before the loop polls; every later one after)
    h.update(bytes.subarray(at, at + HASH_SLICE));
  }
  return h.digest('hex');
}

/** A text/csv body: one pack per line in the column named by ?column=, the lot's fields in the query. */
async function csvLot(req: Request): Promise<RequestedLot> {
  const q = req.query as CsvQuery;
  // the body as UTF-8 bytes (http/request-body.ts), read in slices: never one string of the whole CSV
  const bytes = req.rawBody ?? Buffer.alloc(0);
  if (!q.column) throw new ValidationProblem('a text/csv lot needs ?column=<header of the measurement column>', [{ pointer: '/query/column', detail: 'required with text/csv' }]);
  let csv;
  try {
    csv = await readCsvLot(bytes, { column: q.column, tareColumn: q.tareColumn ?? null, delimiter: q.delimiter, decimal: q.decimal, maxRows: MAX_MEASUREMENTS });
  } catch (err) {
    if ((err as { tooMany?: boolean }).tooMany) throw failureProblem(tooManyMeasurements(MAX_MEASUREMENTS + 1), req);
    throw err;
  }
  const sub: LotSubmission = {
    measurementUnit: q.measurementUnit as LotSubmission['measurementUnit'],
    // Float64Arrays, as the reader fills them: a big lot's are moved to the aside thread to be judged
    measurements: csv.measurements as unknown as number[],
    ...(csv.tares ? { tares: csv.tares as unknown as number[] } : {}),
  };
  for (const k of CSV_FIELDS) if (q[k] !== undefined) (sub as Record<string, unknown>)[k] = q[k];
  const retest = csvRetest(q);
  if (retest) sub.retest = retest;
  if (!sub.measurementUnit) throw new ValidationProblem('a text/csv lot needs ?measurementUnit=', [{ pointer: '/query/measurementUnit', detail: 'required with text/csv' }]);
  const { lines } = csv;
  const where = (field: string, i: number) => `CSV line ${lines[i] ?? '?'} (column ${JSON.stringify(field === 'tares' ? q.tareColumn : q.column)})`;
  const VALUE = /^\/(measurements|tares)\/(\d+)$/;
  return {
    lot: {
      sub,
      source: {
        format: 'csv',
        sha256: await sha256InSlices(bytes),
        column: q.column,
        tareColumn: q.tareColumn ?? null,
        delimiter: csv.delimiter,
        decimal: csv.decimal,
        rowsRead: csv.measurements.length,
        blankLines: { count: csv.blankLineCount, lines: csv.blankLines },
      },
    },
    locate: (x) => {
      const v = VALUE.exec(x.field);
      if (x.field === '/retest/of') return { pointer: '/query/retestOf', detail: x.detail };
      if (x.field === '/retest') return { pointer: '/query/retestOf', detail: x.detail };
      if (!v) return { pointer: `/query${x.field}`, detail: x.detail };
      const i = Number(v[2]);
      return { pointer: '/body', detail: x.detail.replace(`${v[1]}[${i}]`, where(v[1]!, i)), line: lines[i] };
    },
    reword: (t) => t.replace(/\b(measurements|tares)\[(\d+)\]/, (_m, f: string, i: string) => where(f, Number(i))),
  };
}

/**
 * Submits the lot a request carries. A key seen before replays its reply before the body is even
 * read as a lot; a failure of the submission is a problem pointing into this request.
 */
export async function submitLotRequest(sequelize: Sequelize, config: Config, req: Request): Promise<AppendOutcome> {
  const claim = idempotencyClaim(req, SUBMIT_OPERATION);
  const replay = await priorSubmission(sequelize, claim);
  if (replay) return replay;
  const requested = req.is('text/csv') ? await csvLot(req) : jsonLot(req);
  try {
    return await submitLot(sequelize, config, req.principal!, requested.lot, claim);
  } catch (err) {
    if (!(err instanceof Failure)) throw err;
    throw failureProblem(err, requested.locate, requested.reword(err.message));
  }
}
