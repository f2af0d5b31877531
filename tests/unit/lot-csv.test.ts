// The shared CSV lot reader (shared/csv/lot-csv.ts) on comma-separated, point-decimal files reads
// what the csv-parse reader of issue 14 read, the same way: the same numbers and CSV lines, and a
// refusal where it refused, naming the same line — except that a row of empty fields only is now a
// blank row, skipped and reported (the reference below skips it too; the fixtures test the report).
// The previous reader is kept below as the reference (csv-parse, as it was configured), and
// fast-check writes CSVs from an alphabet of the characters that matter (commas, line ends, white
// space, digits, signs). A second reference, a naive line splitter written here, checks semicolon
// files with decimal commas. Also: the server's wrapper stops at the row limit, yields to the event
// loop while it reads a big body, and tells a refusal as a problem naming the line.
import { parse } from 'csv-parse';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { ValidationProblem } from '../../server/http/problem';
import { readCsvLot } from '../../server/verdicts/lot-csv.http';
import { LotCsvError, readLotCsv, type LotCsvOptions } from '../../shared/csv/lot-csv';

interface Read {
  measurements: Float64Array | number[];
  tares: Float64Array | number[] | null;
  lines: Int32Array | number[];
}

const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;

class RefRefusal extends Error {
  constructor(readonly line: number, readonly malformed: boolean) {
    super(`line ${line}`);
  }
}
class RefColumn extends Error {
  constructor(readonly pointer: string) {
    super(pointer);
  }
}

/** The reader as it was before issue 14 (csv-parse's streaming parser over the body as one string); a record of empty fields only, of any width, is skipped (issue 16), so the width is checked here. */
async function referenceReadCsvLot(text: string, column: string, tareColumn: string | null, maxRows: number): Promise<Read> {
  const measurements: number[] = [];
  const tares: number[] | null = tareColumn ? [] : null;
  const lines: number[] = [];
  let mIndex = -1;
  let tIndex = -1;
  let header: string[] | null = null;
  const parser = parse({ bom: true, trim: true, skip_empty_lines: true, relax_column_count: true, info: true });
  const done = new Promise<void>((resolve, reject) => {
    parser.on('readable', () => {
      let item: { record: string[]; info: { lines: number } } | null;
      try {
        while ((item = parser.read()) !== null) {
          const { record, info } = item;
          const line = info.lines;
          if (record.every((f) => f === '')) continue;
          if (!header) {
            header = record;
            mIndex = header.indexOf(column);
            if (mIndex < 0) throw new RefColumn('/query/column');
            if (tareColumn) {
              tIndex = header.indexOf(tareColumn);
              if (tIndex < 0) throw new RefColumn('/query/tareColumn');
            }
            continue;
          }
          if (record.length !== header.length) throw new RefRefusal(line, true);
          if (measurements.length >= maxRows) throw Object.assign(new Error('too many rows'), { tooMany: true });
          const raw = record[mIndex]!;
          if (!NUMBER.test(raw)) throw new RefRefusal(line, false);
          const v = Number(raw);
          if (!Number.isFinite(v)) throw new RefRefusal(line, false);
          if (v < 0) throw new RefRefusal(line, false);
          if (tares) {
            const rawT = record[tIndex]!;
            if (!NUMBER.test(rawT) || Number(rawT) < 0) throw new RefRefusal(line, false);
            tares.push(Number(rawT));
          }
          lines.push(line);
          measurements.push(v);
        }
      } catch (err) {
        parser.destroy();
        reject(err);
      }
    });
    parser.on('error', (err: Error & { lines?: number }) => reject(new RefRefusal(err.lines ?? 0, true)));
    parser.on('end', () => resolve());
  });
  for (let i = 0; i < text.length; i += 1 << 16) {
    if (parser.destroyed) break;
    parser.write(text.slice(i, i + (1 << 16)));
  }
  if (!parser.destroyed) parser.end();
  await done;
  if (!header) throw new RefColumn('/body');
  return { measurements, tares, lines };
}

/** What a reader made of a CSV, in terms both readers share: the lot, or where and how it refused. */
async function outcome(read: () => Promise<Read> | Read): Promise<unknown> {
  try {
    const lot = await read();
    return { measurements: Array.from(lot.measurements), tares: lot.tares && Array.from(lot.tares), lines: Array.from(lot.lines) };
  } catch (err) {
    if ((err as { tooMany?: boolean }).tooMany) return 'too many rows';
    if (err instanceof RefColumn) return { refused: err.pointer };
    if (err instanceof RefRefusal) return { refused: '/body', line: err.line, malformed: err.malformed };
    if (!(err instanceof LotCsvError)) throw err;
    if (err.fault === 'too-many') return 'too many rows';
    if (err.fault === 'empty') return { refused: '/body' };
    if (err.fault === 'column') return { refused: `/query/${err.param}` };
    return { refused: '/body', line: err.line, malformed: err.fault === 'malformed' };
  }
}

async function both(text: string, column = 'net', tare: string | null = null, maxRows = 1000): Promise<[unknown, unknown]> {
  return [
    await outcome(() => readLotCsv(new TextEncoder().encode(text), { column, tareColumn: tare, maxRows })),
    await outcome(() => referenceReadCsvLot(text, column, tare, maxRows)),
  ];
}

describe('readLotCsv reads a comma-separated file as the csv-parse reader did', () => {
  it.each([
    ['plain', 'pack,net\n1,500.1\n2,499.9\n'],
    ['no final line end', 'pack,net\n1,500.1\n2,499.9'],
    ['CRLF', 'pack,net\r\n1,500.1\r\n2,499.9\r\n'],
    ['CR', 'pack,net\r1,500.1\r2,499.9\r'],
    ['a BOM', '\ufeffpack,net\n1,500.1\n'],
    ['white space around fields', ' pack , net \n1,\t500.1 \n 2 ,499.9\t\n'],
    ['unicode white space around a number', 'pack,net\n1,\u00a0500.1\u2003\n'],
    ['empty and blank lines', '\n\npack,net\n\n1,500.1\n   \n\t\n2,499.9\n\n'],
    ['a row of empty fields', 'pack,net\n1,500.1\n , \n2,499.9\n'],
    ['quoted fields', '"pack","net"\n"1","500.1"\n2, "499.9" \n'],
    ['a row with a field too many', 'pack,net\n1,500.1\n2,501.2,7\n3,499.9\n'],
    ['a row with a field too few', 'pack,net\n1,500.1\n2\n'],
    ['a quote inside a field', 'pack,net\n1,50"0.1\n'],
    ['text after a closing quote', 'pack,net\n1,"500"x\n'],
    ['not a number', 'pack,net\n1,abc\n'],
    ['an empty value', 'pack,net\n1,\n'],
    ['negative', 'pack,net\n1,-3\n'],
    ['not finite', 'pack,net\n1,1e999\n'],
    ['signs, exponents and dots', 'pack,net\n1,+5e2\n2,.5\n3,5.\n4,-0\n5,1E-3\n'],
    ['no such column', 'pack,gross\n1,500\n'],
    ['empty body', ''],
    ['blank lines only', '\n \n\r\n'],
    ['header only', 'pack,net\n'],
    ['the column named twice (the first is read)', 'net,net\n1,2\n'],
    ['non-ASCII in another column', 'pack,station,net\n1,Ærø–麦,500.1\n'],
  ])('%s', async (_label, text) => {
    const [mine, reference] = await both(text);
    expect(mine).toEqual(reference);
  });

  it('a quoted empty field is a value, not a blank row: refused as empty', async () => {
    expect(await outcome(() => readLotCsv(new TextEncoder().encode('net\n""\n1\n'), { column: 'net' }))).toEqual({ refused: '/body', line: 2, malformed: false });
  });

  it('a quoted field holding commas, quotes and line breaks: the same values, each at the line its row ends on', async () => {
    const [mine, reference] = (await both('pack,note,net\n1,"a, ""b""\nc",500.1\n2,"x\r\ny",499.9\n3,z,498\n')) as { measurements: number[]; lines: number[] }[];
    expect(mine!.measurements).toEqual(reference!.measurements);
    // RFC 4180 §2.6: the line breaks inside the quotes are part of the field; the row ends on line 3, then 5, then 6
    expect(mine!.lines).toEqual([3, 5, 6]);
  });

  it('a quote that never closes is refused at the line it opens on', async () => {
    const [mine] = await both('pack,net\n1,500.1\n2,"501.2\n3,499.9\n');
    expect(mine).toEqual({ refused: '/body', line: 3, malformed: true });
  });

  it('with a tare column', async () => {
    for (const text of ['pack,net,tare\n1,500.1,12\n2,499.9,11.5\n', 'pack,net,tare\n1,500.1,-1\n', 'pack,net,tare\n1,500.1,x\n', 'pack,net\n1,500.1\n']) {
      const [mine, reference] = await both(text, 'net', 'tare');
      expect(mine, JSON.stringify(text)).toEqual(reference);
    }
    const [same, sameRef] = await both('pack,net\n1,500.1\n', 'net', 'net');
    expect(same).toEqual(sameRef);
  });

  it('at the row limit: the limit, before anything later in the body', async () => {
    const text = 'pack,net\n1,500\n2,500\n3,500\n4,500\n5,broken\n';
    const [mine, reference] = await both(text, 'net', null, 4);
    expect(mine).toBe('too many rows');
    expect(reference).toBe('too many rows');
    expect(await both(text, 'net', null, 5)).toEqual([
      { refused: '/body', line: 6, malformed: false },
      { refused: '/body', line: 6, malformed: false },
    ]);
  });

  it('agrees on 3 000 random CSVs of commas, line ends, white space and numbers', async () => {
    // one kind of line end per CSV (LF, CRLF or CR), as a file has
    const pieces = [',', '\n', ' ', '\t', '1', '5', '0', '.', '-', '+', 'e', 'x', '500.5', '\u00a0', 'é'];
    const csv = fc
      .tuple(fc.array(fc.constantFrom(...pieces), { maxLength: 40 }), fc.constantFrom('\n', '\r\n', '\r'))
      .map(([p, end]) => `a,net\n${p.join('')}\n1,2\n`.replace(/\n/g, end));
    // where the old reader let a malformed row further on win over a bad value before it (its
    // parser's error overtook the rows it had parsed), this one refuses the first in the file
    await fc.assert(
      fc.asyncProperty(csv, async (text) => {
        const [mine, reference] = (await both(text)) as { line?: number; malformed?: boolean }[];
        if (mine?.malformed === false && reference?.malformed === true) expect(mine.line!, JSON.stringify(text)).toBeLessThan(reference.line!);
        else expect(mine, JSON.stringify(text)).toEqual(reference);
      }),
      { numRuns: 3000, seed: 14 },
    );
  });
});

/**
 * An independent reader of a semicolon-separated, decimal-comma file without quotes: split the
 * lines, skip a row of empty fields, split on ";", trim, make the one comma a point.
 */
function naiveSemicolonComma(text: string, column: string): Read {
  const rows = text.split(/\r\n|\n|\r/);
  let header: string[] | null = null;
  let index = -1;
  const measurements: number[] = [];
  const lines: number[] = [];
  rows.forEach((row, i) => {
    if (i === rows.length - 1 && row === '') return; // the end of the last line, not a line
    const line = i + 1;
    const fields = row.split(';').map((f) => f.trim());
    if (fields.every((f) => f === '')) return;
    if (!header) {
      header = fields;
      index = header.indexOf(column);
      if (index < 0) throw new RefColumn('/query/column');
      return;
    }
    if (fields.length !== header.length) throw new RefRefusal(line, true);
    const raw = fields[index]!;
    if (raw.includes('.') || raw.split(',').length > 2) throw new RefRefusal(line, false);
    const normal = raw.replace(',', '.');
    if (!NUMBER.test(normal) || !Number.isFinite(Number(normal)) || Number(normal) < 0) throw new RefRefusal(line, false);
    measurements.push(Number(normal));
    lines.push(line);
  });
  if (!header) throw new RefColumn('/body');
  return { measurements, tares: null, lines };
}

describe('readLotCsv on a semicolon file with decimal commas', () => {
  it('agrees with a naive splitter on 3 000 random CSVs (semicolons, commas, points, line ends, white space, digits)', async () => {
    const pieces = [';', ',', '.', '\n', ' ', '\t', '1', '5', '0', '9', '-', 'e', 'x', '500,25', '\u00a0'];
    const csv = fc
      .tuple(fc.array(fc.constantFrom(...pieces), { maxLength: 40 }), fc.constantFrom('\n', '\r\n', '\r'))
      .map(([p, end]) => `a;net\n${p.join('')}\n1;2,5\n`.replace(/\n/g, end));
    const options: LotCsvOptions = { column: 'net', delimiter: 'semicolon', decimal: 'comma' };
    await fc.assert(
      fc.asyncProperty(csv, async (text) => {
        const mine = await outcome(() => readLotCsv(new TextEncoder().encode(text), options));
        const reference = await outcome(() => naiveSemicolonComma(text, 'net'));
        expect(mine, JSON.stringify(text)).toEqual(reference);
      }),
      { numRuns: 3000, seed: 16 },
    );
  });

  it('reads 15 significant digits exactly and longer ones as Number() does (ECMA-262 §7.1.4.1.1)', () => {
    const values = ['123456789012,345', '0,1', '999999999999999', '1234567890123456,7', '0,30000000000000004'];
    const lot = readLotCsv(new TextEncoder().encode(`net\n${values.join('\n')}\n`), { column: 'net', delimiter: 'semicolon', decimal: 'comma' });
    expect(Array.from(lot.measurements)).toEqual(values.map((v) => Number(v.replace(',', '.'))));
  });
});

describe("the server's wrapper (server/verdicts/lot-csv.http.ts)", () => {
  it('lets timers run while it reads (it yields between slices of the body)', async () => {
    const rows = Array.from({ length: 200_000 }, (_, i) => `${i + 1},${500 + (i % 100) / 10}`).join('\n');
    const body = Buffer.from(`pack,net\n${rows}\n`);
    let ticks = 0;
    const timer = setInterval(() => ticks++, 0);
    const lot = await readCsvLot(body, { column: 'net', maxRows: 1_000_000 });
    clearInterval(timer);
    expect(lot.measurements.length).toBe(200_000);
    expect(lot.lines[199_999]).toBe(200_001);
    expect(ticks).toBeGreaterThan(2);
  });

  it('tells a refusal as a 400 problem naming the CSV line, the parameter to choose and the choices', async () => {
    const err = await readCsvLot(Buffer.from('net\n4,98\n'), { column: 'net' }).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(ValidationProblem);
    const p = err as ValidationProblem;
    expect(p.status).toBe(400);
    expect(p.errors[0]!.pointer).toBe('/query/decimal');
    expect(p.errors[0]!.detail).toMatch(/^CSV line 2: .*choose \?decimal=comma/);
    expect(p.extensions).toMatchObject({ line: 2, choose: { decimal: ['comma'] } });
  });

  it('past the row limit: an error marked tooMany, for the 413', async () => {
    const err = await readCsvLot(Buffer.from('net\n1\n2\n3\n'), { column: 'net', maxRows: 2 }).catch((e: unknown) => e);
    expect((err as { tooMany?: boolean }).tooMany).toBe(true);
  });
});
