// Reading a lot from text/csv on the server: the shared reader (shared/csv/lot-csv.ts, the same one
// the console's preview runs), given the event loop back between slices of the body, and its
// refusals told as problems in the request's terms: "CSV line 19", "/query/column", "/query/decimal".
import { setImmediate as nextTurn } from 'node:timers/promises';
import { LotCsvError, lotCsvSteps, type LotCsv, type LotCsvOptions } from '../../shared/csv/lot-csv';
import { ValidationProblem } from '../http/problem';

export type { LotCsv } from '../../shared/csv/lot-csv';

/** A refusal of the reader as a 400 problem naming the line, and the query parameter when one would change the reading. */
function csvProblem(err: LotCsvError): ValidationProblem {
  const detail = err.line === null ? err.detail : `CSV line ${err.line}: ${err.detail}`;
  const pointer = err.param ? `/query/${err.param}` : '/body';
  const p = new ValidationProblem(detail, [{ pointer, detail }]);
  const ext = p.extensions as Record<string, unknown>;
  if (err.line !== null) ext.line = err.line;
  if (err.choose.delimiter || err.choose.decimal) ext.choose = err.choose;
  return p;
}

/**
 * Reads a CSV lot's body, yielding to the event loop after every slice. Throws a ValidationProblem
 * for a CSV it will not read, and an error marked `tooMany` past `maxRows` rows.
 */
export async function readCsvLot(body: Uint8Array, options: LotCsvOptions & { column: string }): Promise<LotCsv> {
  const steps = lotCsvSteps(body, options);
  try {
    for (;;) {
      const r = steps.next();
      if (r.done) return r.value;
      await nextTurn();
    }
  } catch (err) {
    if (!(err instanceof LotCsvError)) throw err;
    if (err.fault === 'too-many') throw Object.assign(new Error('too many rows'), { tooMany: true });
    throw csvProblem(err);
  }
}
