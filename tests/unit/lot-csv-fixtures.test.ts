// The shared CSV reader (shared/csv/lot-csv.ts) on the fixtures of tests/fixtures/csv: each file
// with the choices of its case gives the outcome written in outcomes.json (whose `why` says where
// each expected value comes from). The console and POST /v1/lots run the same cases.
import { describe, expect, it } from 'vitest';
import { LotCsvError, readLotCsv } from '../../shared/csv/lot-csv';
import { CSV_CASES } from '../fixtures/csv/cases';
import { fixtureBytes } from '../fixtures/csv/fixture-bytes';

describe('the shared CSV reader on the fixtures', () => {
  it('has a case for every kind the fixtures stand for', () => {
    expect(CSV_CASES.length).toBeGreaterThanOrEqual(15);
  });

  it.each(CSV_CASES.map((c) => [c.name, c] as const))('%s', (_name, c) => {
    const run = () => readLotCsv(fixtureBytes(c.file), { column: c.query.column, tareColumn: c.query.tareColumn ?? null, delimiter: c.query.delimiter, decimal: c.query.decimal });
    if (c.read) {
      const lot = run();
      expect({
        measurements: Array.from(lot.measurements),
        tares: lot.tares && Array.from(lot.tares),
        lines: Array.from(lot.lines),
        delimiter: lot.delimiter,
        decimal: lot.decimal,
        blankLines: lot.blankLines,
      }, c.why).toEqual(c.read);
      expect(lot.blankLineCount).toBe(c.read.blankLines.length);
      return;
    }
    let err: unknown = null;
    try {
      run();
    } catch (e) {
      err = e;
    }
    expect(err, c.why).toBeInstanceOf(LotCsvError);
    const e = err as LotCsvError;
    expect({ line: e.line, param: e.param, choose: e.choose }, `${c.why}: ${e.message}`).toEqual({ line: c.refused!.line, param: c.refused!.param, choose: c.refused!.choose });
    expect(e.message).toContain(c.refused!.says);
  });
});
