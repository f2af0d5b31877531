// Reading a lot from text/csv: a header row, one pack per line, the measurement column named by the
// caller. Parsed with csv-parse's streaming parser; every error names its CSV line.
import { parse } from 'csv-parse';
import { ValidationProblem } from '../http/problem';

export interface CsvLot {
  measurements: number[];
  tares: number[] | null;
  /** CSV line (1-based, the header is line 1) of each measurement, for error messages. */
  lines: Int32Array;
}

const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;

function lineProblem(line: number, detail: string, pointer = '/body'): ValidationProblem {
  const p = new ValidationProblem(`CSV line ${line}: ${detail}`, [{ pointer, detail: `CSV line ${line}: ${detail}` }]);
  (p.extensions as Record<string, unknown>).line = line;
  return p;
}

export async function readCsvLot(text: string, column: string, tareColumn: string | null, maxRows: number): Promise<CsvLot> {
  const measurements: number[] = [];
  const tares: number[] | null = tareColumn ? [] : null;
  let lines = new Int32Array(1024);
  let mIndex = -1;
  let tIndex = -1;
  let header: string[] | null = null;

  const parser = parse({ bom: true, trim: true, skip_empty_lines: true, relax_column_count: false, info: true });
  const done = new Promise<void>((resolve, reject) => {
    parser.on('readable', () => {
      let item: { record: string[]; info: { lines: number } } | null;
      try {
        while ((item = parser.read()) !== null) {
          const { record, info } = item;
          const line = info.lines;
          if (!header) {
            header = record;
            mIndex = header.indexOf(column);
            if (mIndex < 0) {
              throw new ValidationProblem(`the CSV header has no column ${JSON.stringify(column)} (it has ${header.map((h) => JSON.stringify(h)).join(', ')})`, [
                { pointer: '/query/column', detail: `no such column in the header row` },
              ]);
            }
            if (tareColumn) {
              tIndex = header.indexOf(tareColumn);
              if (tIndex < 0) {
                throw new ValidationProblem(`the CSV header has no column ${JSON.stringify(tareColumn)}`, [
                  { pointer: '/query/tareColumn', detail: 'no such column in the header row' },
                ]);
              }
            }
            continue;
          }
          if (measurements.length >= maxRows) {
            throw Object.assign(new Error('too many rows'), { tooMany: true });
          }
          const raw = record[mIndex]!;
          if (!NUMBER.test(raw)) throw lineProblem(line, `${JSON.stringify(raw)} in column ${JSON.stringify(column)} is not a number`);
          const v = Number(raw);
          if (!Number.isFinite(v)) throw lineProblem(line, `${JSON.stringify(raw)} in column ${JSON.stringify(column)} is not a finite number`);
          if (v < 0) throw lineProblem(line, `${raw} in column ${JSON.stringify(column)} is negative; every value must be ≥ 0`);
          if (tares) {
            const rawT = record[tIndex]!;
            if (!NUMBER.test(rawT) || Number(rawT) < 0) throw lineProblem(line, `${JSON.stringify(rawT)} in column ${JSON.stringify(tareColumn)} is not a number ≥ 0`);
            tares.push(Number(rawT));
          }
          if (measurements.length === lines.length) {
            const bigger = new Int32Array(lines.length * 2);
            bigger.set(lines);
            lines = bigger;
          }
          lines[measurements.length] = line;
          measurements.push(v);
        }
      } catch (err) {
        parser.destroy();
        reject(err);
      }
    });
    parser.on('error', (err: Error & { code?: string; lines?: number }) => {
      const line = err.lines ?? 0;
      reject(lineProblem(line, `the CSV is malformed (${err.message.replace(/^Invalid [^:]*: /, '')})`));
    });
    parser.on('end', () => resolve());
  });
  const CHUNK = 1 << 16;
  for (let i = 0; i < text.length; i += CHUNK) {
    if (parser.destroyed) break;
    parser.write(text.slice(i, i + CHUNK));
  }
  if (!parser.destroyed) parser.end();
  await done;
  if (!header) throw new ValidationProblem('the CSV body is empty: it needs a header row and one line per pack', [{ pointer: '/body', detail: 'empty CSV' }]);
  return { measurements, tares, lines: lines.subarray(0, measurements.length) };
}
