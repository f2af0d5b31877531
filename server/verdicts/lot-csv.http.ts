// Reading a lot from text/csv: a header row, one pack per line, the measurement column named by the
// caller; every error names its CSV line.
//
// Our own reader, written because neither CSV package in package.json does this job: csv-parse and
// papaparse build an array of strings for every row (csv-parse an info object too). On a
// 1 000 000-row, 29 MB CSV (the shared test machine, loaded): csv-parse 7.0 s without `info`,
// 18.7 s with it as configured here, papaparse 7.8–10 s, and the whole body parsed before the row
// limit could act; this reader 0.35–0.45 s of CPU. It walks the body's bytes once, keeps only the
// numbers of the named columns (no row arrays; a plain decimal is read from its bytes, without a
// string), stops at the row limit, and gives the event loop back every SLICE bytes so other
// requests are served meanwhile.
//
// It reads the CSV that csv-parse was configured to read here (RFC 4180): LF, CRLF or CR line ends;
// a field in double quotes may hold commas and line breaks, and "" for a quote; white space around
// a field is dropped (String.prototype.trim's, as csv-parse's trim option); empty lines are skipped;
// every row has as many fields as the header row; a UTF-8 BOM before the header is skipped.
import { setImmediate as nextTurn } from 'node:timers/promises';
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

/** Bytes read between two turns of the event loop (a fraction of a millisecond's work). */
const SLICE = 1 << 14;

const QUOTE = 0x22;
const COMMA = 0x2c;
const LF = 0x0a;
const CR = 0x0d;
/** Space, tab, vertical tab, form feed: the ASCII white space that is not a line end. */
const blank = (c: number) => c === 0x20 || c === 0x09 || c === 0x0b || c === 0x0c;

/** Where one field of the current row lies in the body. */
interface Span {
  start: number;
  end: number;
  quoted: boolean;
  /** A quoted field holding "" (a quote), to be unescaped when read as text. */
  escaped: boolean;
}

/** A field as text: quotes undone, or (unquoted) trimmed of any white space the byte scan left. */
function fieldText(b: Buffer, f: Span): string {
  const text = b.toString('utf8', f.start, f.end);
  if (f.quoted) return f.escaped ? text.replace(/""/g, '"') : text;
  return b[f.start]! >= 0x80 || b[f.end - 1]! >= 0x80 ? text.trim() : text;
}

/** A field that reads as a number: its text (short; ASCII unless it is not a number at all). */
function numberText(b: Buffer, f: Span): string {
  return f.quoted || b[f.start]! >= 0x80 || b[f.end - 1]! >= 0x80 ? fieldText(b, f) : b.toString('latin1', f.start, f.end);
}

const POW10 = Array.from({ length: 16 }, (_, k) => 10 ** k);

/**
 * The value of a field written as plain decimal digits — an optional sign, at most one dot, at
 * most 15 digits — read from its bytes without making a string; NaN for any other form, which is
 * then read from its text. The same double as Number(text): the digits as an integer below 2^53
 * and a power of ten up to 10^15 are both exact, and one division rounds correctly (Clinger's fast
 * path).
 */
function plainDecimal(b: Buffer, f: Span): number {
  let i = f.start;
  const negative = b[i] === 0x2d;
  if (negative || b[i] === 0x2b) i++;
  let digits = 0;
  let scale = -1;
  let m = 0;
  for (; i < f.end; i++) {
    const c = b[i]!;
    if (c >= 0x30 && c <= 0x39) {
      m = m * 10 + (c - 0x30);
      digits++;
    } else if (c === 0x2e && scale < 0) {
      scale = digits;
    } else return NaN;
  }
  if (digits === 0 || digits > 15) return NaN;
  const v = scale < 0 ? m : m / POW10[digits - scale]!;
  return negative ? -v : v;
}

/** Line breaks (LF, CRLF or CR, one each) between two offsets: a quoted field may hold some. */
function lineBreaks(b: Buffer, from: number, to: number): number {
  let n = 0;
  for (let i = from; i < to; i++) {
    const c = b[i]!;
    if (c === LF) n++;
    else if (c === CR) {
      n++;
      if (b[i + 1] === LF && i + 1 < to) i++;
    }
  }
  return n;
}

export async function readCsvLot(body: Buffer, column: string, tareColumn: string | null, maxRows: number): Promise<CsvLot> {
  const b = body;
  const n = b.length;
  const measurements: number[] = [];
  const tares: number[] | null = tareColumn ? [] : null;
  let lines = new Int32Array(1024);
  let header: string[] | null = null;
  let width = 0;
  let mIndex = -1;
  let tIndex = -1;
  const m: Span = { start: 0, end: 0, quoted: false, escaped: false };
  const t: Span = { start: 0, end: 0, quoted: false, escaped: false };
  const first: Span = { start: 0, end: 0, quoted: false, escaped: false };
  const keep = (into: Span, start: number, end: number, quoted: boolean, escaped: boolean) => {
    into.start = start;
    into.end = end;
    into.quoted = quoted;
    into.escaped = escaped;
  };
  let headerFields: string[] = [];

  let pos = b[0] === 0xef && b[1] === 0xbb && b[2] === 0xbf ? 3 : 0;
  /** The line `pos` is on (1-based; the header is line 1 unless empty lines come first). */
  let line = 1;
  let turnAt = SLICE;
  while (pos < n) {
    if (pos >= turnAt) {
      await nextTurn();
      turnAt = pos + SLICE;
    }
    // One row: its fields, up to a line end or the end of the body.
    let fields = 0;
    if (!header) headerFields = [];
    for (;;) {
      let start = pos;
      while (start < n && blank(b[start]!)) start++;
      let end: number;
      let quoted = false;
      let escaped = false;
      if (start < n && b[start] === QUOTE) {
        quoted = true;
        const opened = line;
        let close = start + 1;
        for (;;) {
          close = b.indexOf(QUOTE, close);
          if (close < 0) throw lineProblem(opened, 'the CSV is malformed (a quoted field opened on this line is never closed)');
          if (b[close + 1] !== QUOTE) break;
          escaped = true;
          close += 2;
        }
        line += lineBreaks(b, start + 1, close);
        end = close;
        start += 1;
        pos = close + 1;
        while (pos < n && blank(b[pos]!)) pos++;
        const after = b[pos];
        if (pos < n && after !== COMMA && after !== LF && after !== CR) {
          throw lineProblem(line, `the CSV is malformed (${JSON.stringify(b.toString('utf8', pos, pos + 1))} after the closing quote of field ${fields + 1})`);
        }
      } else {
        end = start;
        for (; end < n; end++) {
          const c = b[end]!;
          if (c === COMMA || c === LF || c === CR) break;
          if (c === QUOTE) throw lineProblem(line, `the CSV is malformed (a quote inside field ${fields + 1}, which does not start with one)`);
        }
        pos = end;
        while (end > start && blank(b[end - 1]!)) end--;
      }
      if (fields === 0) keep(first, start, end, quoted, escaped);
      if (!header) headerFields.push(fieldText(b, { start, end, quoted, escaped }));
      if (fields === mIndex) keep(m, start, end, quoted, escaped);
      if (fields === tIndex) keep(t, start, end, quoted, escaped);
      fields++;
      if (pos < n && b[pos] === COMMA) {
        pos++;
        continue;
      }
      break;
    }
    const rowLine = line;
    if (pos < n) {
      pos += b[pos] === CR && b[pos + 1] === LF ? 2 : 1;
      line++;
    }
    // An empty line, or one of white space only, is skipped (a quoted empty field is a field).
    if (fields === 1 && !first.quoted && (first.end === first.start || fieldText(b, first) === '')) continue;
    if (!header) {
      header = headerFields;
      width = header.length;
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
    if (fields !== width) throw lineProblem(rowLine, `the CSV is malformed (expect ${width} fields, got ${fields} on line ${rowLine})`);
    if (measurements.length >= maxRows) {
      throw Object.assign(new Error('too many rows'), { tooMany: true });
    }
    let v = plainDecimal(b, m);
    if (Number.isNaN(v)) {
      const raw = numberText(b, m);
      if (!NUMBER.test(raw)) throw lineProblem(rowLine, `${JSON.stringify(raw)} in column ${JSON.stringify(column)} is not a number`);
      v = Number(raw);
      if (!Number.isFinite(v)) throw lineProblem(rowLine, `${JSON.stringify(raw)} in column ${JSON.stringify(column)} is not a finite number`);
    }
    if (v < 0) throw lineProblem(rowLine, `${numberText(b, m)} in column ${JSON.stringify(column)} is negative; every value must be ≥ 0`);
    if (tares) {
      let tare = plainDecimal(b, t);
      if (Number.isNaN(tare)) {
        const rawT = numberText(b, t);
        tare = NUMBER.test(rawT) ? Number(rawT) : NaN;
      }
      if (!(tare >= 0)) throw lineProblem(rowLine, `${JSON.stringify(numberText(b, t))} in column ${JSON.stringify(tareColumn)} is not a number ≥ 0`);
      tares.push(tare);
    }
    if (measurements.length === lines.length) {
      const bigger = new Int32Array(lines.length * 2);
      bigger.set(lines);
      lines = bigger;
    }
    lines[measurements.length] = rowLine;
    measurements.push(v);
  }
  if (!header) throw new ValidationProblem('the CSV body is empty: it needs a header row and one line per pack', [{ pointer: '/body', detail: 'empty CSV' }]);
  return { measurements, tares, lines: lines.subarray(0, measurements.length) };
}
