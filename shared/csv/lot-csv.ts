// One reader of a lot's CSV for the server (POST /v1/lots, text/csv) and the console's preview, so
// that a file reads the same way in both. Pure TypeScript on bytes (a Uint8Array): no Node-only API.
//
// What it reads (the rules are in docs: openapi/parts/verdicts.yaml, submitLot):
// - RFC 4180 fields: LF, CRLF or CR line ends; a field in double quotes may hold the delimiter and
//   line breaks, and "" for a quote; white space around a field is dropped; a UTF-8 BOM is skipped.
// - A header row, then one pack per row, each row as wide as the header.
// - The delimiter (comma, semicolon, tab) as given, or found in the header row: a comma or a
//   semicolon (both: refused as ambiguous), else a tab; a one-column header has none, and a data
//   row that a comma would split is refused as ambiguous (decimal comma or a column too many?).
// - The decimal separator (point, comma) as given, or: the point in a comma-separated file, else
//   the mark of the first value that has one. A value that could be either a decimal or a number
//   with a thousands separator ("1.002", "4,980") cannot decide it (refused: choose). A value with
//   the other mark, or with both, or with one mark twice, is refused: thousands separators are never
//   read. A number is never cut short: a field too many in a row is refused, naming the line.
// - A blank row (an empty line, white space only, or every field empty) is skipped and reported by
//   its line; a row with an empty measurement (or tare) is refused, naming the line.
//
// Speed (the 1 000 000-row case of tests/integration/faults-door-bodies.test.ts): one walk over the
// bytes, only the named columns' numbers kept (no row arrays), a plain decimal read from its bytes
// without a string; `lotCsvSteps` yields every SLICE bytes so a server can give its event loop back.

export type Delimiter = 'comma' | 'semicolon' | 'tab';
export type DecimalMark = 'point' | 'comma';
export const DELIMITERS: readonly Delimiter[] = ['comma', 'semicolon', 'tab'];
export const DECIMAL_MARKS: readonly DecimalMark[] = ['point', 'comma'];

export interface LotCsvOptions {
  /** Header of the measurement column; omitted: the column named like a measurement (or the only one). */
  column?: string;
  /** Header of the per-pack tare column; null: none; omitted: the column named like a tare, if any. */
  tareColumn?: string | null;
  /** Omitted: found in the header row. */
  delimiter?: Delimiter;
  /** Omitted: found in the values. */
  decimal?: DecimalMark;
  /** Rows of packs beyond which the reader stops (fault `too-many`). */
  maxRows?: number;
}

export interface LotCsv {
  /** Float64Arrays: a big lot's numbers can move to another thread without a copy. */
  measurements: Float64Array;
  tares: Float64Array | null;
  /** The line (1-based, in the file) each pack's row ends on. */
  lines: Int32Array;
  header: string[];
  column: string;
  tareColumn: string | null;
  /** null: a one-column file, nothing separated. */
  delimiter: Delimiter | null;
  /** null: no value had a decimal separator. */
  decimal: DecimalMark | null;
  /** Whether the delimiter and decimal separator were given (true) or found in the file (false). */
  given: { delimiter: boolean; decimal: boolean };
  /** Blank rows skipped: how many, and the lines of the first BLANK_LINES_KEPT. */
  blankLineCount: number;
  blankLines: number[];
}

export const BLANK_LINES_KEPT = 100;

export type LotCsvFault = 'malformed' | 'value' | 'ambiguous' | 'column' | 'empty' | 'too-many';

/** Why a CSV is refused: `detail` in words, the line it is on, the request parameter to change, what to choose. */
export class LotCsvError extends Error {
  constructor(
    readonly fault: LotCsvFault,
    readonly detail: string,
    readonly line: number | null,
    readonly param: 'column' | 'tareColumn' | 'delimiter' | 'decimal' | null = null,
    readonly choose: { delimiter?: Delimiter[]; decimal?: DecimalMark[] } = {},
  ) {
    super(line === null ? detail : `line ${line}: ${detail}`);
    this.name = 'LotCsvError';
  }
  /** The header row, when the refusal came after it was read (for a console to offer its columns). */
  header: string[] | null = null;
}

/** Header names the console recognises as a measurement or a tare column (alone or with a unit suffix: gross_g, "net (g)"). */
export const MEASUREMENT_NAMES = ['measurement', 'measurements', 'gross', 'net', 'weight', 'value', 'quantity', 'mass', 'volume'];
export const TARE_NAMES = ['tare', 'tares'];

function isNamed(header: string, names: readonly string[]): boolean {
  const h = header.trim().toLowerCase();
  return names.some((n) => h === n || (h.startsWith(n) && ' _([-'.includes(h.charAt(n.length))));
}

const QUOTE = 0x22;
const COMMA = 0x2c;
const SEMICOLON = 0x3b;
const TAB = 0x09;
const POINT = 0x2e;
const LF = 0x0a;
const CR = 0x0d;
const BYTE: Record<Delimiter, number> = { comma: COMMA, semicolon: SEMICOLON, tab: TAB };
const MARK_BYTE: Record<DecimalMark, number> = { point: POINT, comma: COMMA };
const MARK_NAME: Record<DecimalMark, string> = { point: 'decimal point', comma: 'decimal comma' };

/** Bytes read between two yields of `lotCsvSteps` (a fraction of a millisecond's work). */
export const SLICE = 1 << 14;

const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;
/** One mark followed by exactly three digits: a decimal, or an integer with a thousands separator. */
const THOUSANDS_LIKE = /^[+-]?\d{1,3}[.,]\d{3}$/;
const POW10 = Array.from({ length: 16 }, (_, k) => 10 ** k);
const utf8 = new TextDecoder('utf-8');

interface Span {
  start: number;
  end: number;
  quoted: boolean;
  /** A quoted field holding "" (a quote), to be unescaped when read as text. */
  escaped: boolean;
}

const q = (s: string) => JSON.stringify(s);
const blank = (c: number, tabIsBlank: boolean) => c === 0x20 || c === 0x0b || c === 0x0c || (c === TAB && tabIsBlank);

/** A value written as plain digits with at most the decimal separator `mark`, at most 15 digits, read from its bytes (NaN otherwise): the same double as Number(text) (Clinger's fast path: both parts exact, one division). */
function plainDecimal(b: Uint8Array, start: number, end: number, mark: number): number {
  let i = start;
  const negative = b[i] === 0x2d;
  if (negative || b[i] === 0x2b) i++;
  let digits = 0;
  let scale = -1;
  let v = 0;
  for (; i < end; i++) {
    const c = b[i]!;
    if (c >= 0x30 && c <= 0x39) {
      v = v * 10 + (c - 0x30);
      digits++;
    } else if (c === mark && scale < 0) {
      scale = digits;
    } else return NaN;
  }
  if (digits === 0 || digits > 15) return NaN;
  const x = scale < 0 ? v : v / POW10[digits - scale]!;
  return negative ? -x : x;
}

/**
 * Reads a lot's CSV, yielding after every SLICE bytes (a server gives its event loop back there;
 * `readLotCsv` runs it through). Throws LotCsvError for anything it will not read.
 */
export function* lotCsvSteps(b: Uint8Array, options: LotCsvOptions = {}): Generator<void, LotCsv, void> {
  const n = b.length;
  const maxRows = options.maxRows ?? Number.POSITIVE_INFINITY;

  const text = (f: Span): string => {
    const s = utf8.decode(b.subarray(f.start, f.end));
    if (f.quoted) return f.escaped ? s.replace(/""/g, '"') : s;
    return b[f.start]! >= 0x80 || b[f.end - 1]! >= 0x80 ? s.trim() : s;
  };

  let pos = b[0] === 0xef && b[1] === 0xbb && b[2] === 0xbf ? 3 : 0;

  // The delimiter: as given, or from the header row (its first line with anything on it).
  let delimiter: Delimiter | null = options.delimiter ?? null;
  if (!delimiter) {
    let i = pos;
    let line = 1;
    let inQuote = false;
    let commas = 0;
    let semicolons = 0;
    let tabs = 0;
    let content = false;
    for (; i < n; i++) {
      const c = b[i]!;
      if (inQuote) {
        if (c === QUOTE) inQuote = false;
        continue;
      }
      if (c === QUOTE) {
        inQuote = true;
        content = true;
      } else if (c === LF || c === CR) {
        if (content) break;
        if (c === CR && b[i + 1] === LF) i++;
        line++;
      } else if (c === COMMA) commas++;
      else if (c === SEMICOLON) semicolons++;
      else if (c === TAB) tabs++;
      else if (c !== 0x20 && c !== 0x0b && c !== 0x0c) content = true;
      if (c === COMMA || c === SEMICOLON) content = true;
    }
    if (commas > 0 && semicolons > 0) {
      throw new LotCsvError(
        'ambiguous',
        'the header row holds both commas and semicolons, so the column separator is not clear: choose ?delimiter=comma or ?delimiter=semicolon',
        line,
        'delimiter',
        { delimiter: ['comma', 'semicolon'] },
      );
    }
    delimiter = commas > 0 ? 'comma' : semicolons > 0 ? 'semicolon' : tabs > 0 && content ? 'tab' : null;
  }
  /** Space, vertical tab, form feed, and tab unless it separates fields: white space around a field. */
  const tabIsBlank = delimiter !== 'tab';
  // The bytes that end a field: the delimiter; in a one-column file (none found) a comma or a
  // semicolon still ends one, for the row to be refused (not a comma when decimal commas are chosen).
  const sep = delimiter ? BYTE[delimiter] : -1;
  const split1 = delimiter ? sep : SEMICOLON;
  const split2 = delimiter ? sep : options.decimal === 'comma' ? SEMICOLON : COMMA;

  // The decimal separator: as given; the point in a comma-separated file; else the first value's mark.
  let decimal: DecimalMark | null = options.decimal ?? (delimiter === 'comma' ? 'point' : null);
  const decimalGiven = options.decimal !== undefined;
  /** Where the decimal separator was decided, for the message when a value disagrees. */
  let decidedAt: number | null = null;
  let markByte = decimal ? MARK_BYTE[decimal] : -1;

  let measurements = new Float64Array(1024);
  let tares: Float64Array | null = null;
  let lines = new Int32Array(1024);
  let count = 0;
  let header: string[] | null = null;
  let headerFields: string[] = [];
  let width = 0;
  let mIndex = -1;
  let tIndex = -1;
  let column = '';
  let tareColumn: string | null = null;
  let blankLineCount = 0;
  const blankLines: number[] = [];
  const m: Span = { start: 0, end: 0, quoted: false, escaped: false };
  const t: Span = { start: 0, end: 0, quoted: false, escaped: false };
  const keep = (into: Span, start: number, end: number, quoted: boolean, escaped: boolean) => {
    into.start = start;
    into.end = end;
    into.quoted = quoted;
    into.escaped = escaped;
  };

  /** Any other form of a value: its text checked against the decimal separator, which it may decide. */
  const slowNumber = (f: Span, line: number, name: string): number => {
    const raw = text(f).trim();
    if (raw === '') throw new LotCsvError('value', `no value in column ${q(name)}: every pack needs one`, line);
    const points = raw.split('.').length - 1;
    const commas = raw.split(',').length - 1;
    if (points > 0 && commas > 0) {
      throw new LotCsvError('value', `${q(raw)} in column ${q(name)} holds both a point and a comma: thousands separators are not read; write the number without them`, line);
    }
    if (points + commas > 1) {
      throw new LotCsvError('value', `${q(raw)} in column ${q(name)} holds more than one ${points ? 'point' : 'comma'}: thousands separators are not read; write the number without them`, line);
    }
    const mark: DecimalMark | null = points ? 'point' : commas ? 'comma' : null;
    if (mark && decimal === null) {
      if (THOUSANDS_LIKE.test(raw)) {
        const other = raw.replace(/[.,]/, '');
        throw new LotCsvError(
          'ambiguous',
          `${q(raw)} in column ${q(name)} could be a decimal or ${Number(other)} written with a thousands separator, and no earlier value tells which: choose ?decimal=${mark} to read it as ${raw.replace(',', '.')} (thousands separators are never read)`,
          line,
          'decimal',
          { decimal: [mark] },
        );
      }
      decimal = mark;
      markByte = MARK_BYTE[mark];
      decidedAt = line;
    } else if (mark && mark !== decimal) {
      const why = decimalGiven
        ? `the decimal separator is the ${decimal === 'point' ? 'point' : 'comma'}, as chosen`
        : decidedAt !== null
          ? `line ${decidedAt} used a ${MARK_NAME[decimal!]}`
          : 'the file is comma-separated, so its decimal separator is taken to be the point';
      throw new LotCsvError(
        decimalGiven ? 'value' : 'ambiguous',
        `${q(raw)} in column ${q(name)} has a ${MARK_NAME[mark]}, but ${why}; thousands separators are not read${decimalGiven ? '' : `: if it is a ${MARK_NAME[mark]}, choose ?decimal=${mark}`}`,
        line,
        decimalGiven ? null : 'decimal',
        decimalGiven ? {} : { decimal: [mark] },
      );
    }
    const normal = mark === 'comma' ? raw.replace(',', '.') : raw;
    if (!NUMBER.test(normal)) throw new LotCsvError('value', `${q(raw)} in column ${q(name)} is not a number`, line);
    const v = Number(normal);
    if (!Number.isFinite(v)) throw new LotCsvError('value', `${q(raw)} in column ${q(name)} is not a finite number`, line);
    return v;
  };

  let line = 1;
  let turnAt = pos + SLICE;
  while (pos < n) {
    if (pos >= turnAt) {
      yield;
      turnAt = pos + SLICE;
    }
    // One row: its fields, up to a line end or the end of the body.
    let fields = 0;
    let empty = true;
    /** In a one-column file: the byte that split a field, if any. */
    let splitBy = -1;
    if (!header) headerFields = [];
    for (;;) {
      let start = pos;
      while (start < n && blank(b[start]!, tabIsBlank)) start++;
      let end: number;
      let quoted = false;
      let escaped = false;
      if (start < n && b[start] === QUOTE) {
        quoted = true;
        const opened = line;
        let close = start + 1;
        for (;;) {
          close = b.indexOf(QUOTE, close);
          if (close < 0) throw new LotCsvError('malformed', 'the CSV is malformed: a quoted field opened on this line is never closed', opened);
          if (b[close + 1] !== QUOTE) break;
          escaped = true;
          close += 2;
        }
        for (let i = start + 1; i < close; i++) {
          const c = b[i]!;
          if (c === LF) line++;
          else if (c === CR) {
            line++;
            if (b[i + 1] === LF && i + 1 < close) i++;
          }
        }
        end = close;
        start += 1;
        pos = close + 1;
        while (pos < n && blank(b[pos]!, tabIsBlank)) pos++;
        const after = b[pos]!;
        if (pos < n && after !== split1 && after !== split2 && after !== LF && after !== CR) {
          throw new LotCsvError('malformed', `the CSV is malformed: ${q(utf8.decode(b.subarray(pos, pos + 1)))} after the closing quote of field ${fields + 1}`, line);
        }
      } else {
        end = start;
        for (; end < n; end++) {
          const c = b[end]!;
          if (c === split1 || c === split2 || c === LF || c === CR) break;
          if (c === QUOTE) throw new LotCsvError('malformed', `the CSV is malformed: a quote inside field ${fields + 1}, which does not start with one`, line);
        }
        pos = end;
        while (end > start && blank(b[end - 1]!, tabIsBlank)) end--;
      }
      if (empty && (quoted || (end > start && (b[start]! < 0x80 || text({ start, end, quoted, escaped }) !== '')))) empty = false;
      if (!header) headerFields.push(text({ start, end, quoted, escaped }));
      if (fields === mIndex) keep(m, start, end, quoted, escaped);
      if (fields === tIndex) keep(t, start, end, quoted, escaped);
      fields++;
      const at = b[pos];
      if (pos < n && (at === split1 || at === split2)) {
        if (splitBy < 0) splitBy = at;
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
    if (empty) {
      // A blank row, or one of empty fields only (a spreadsheet's empty row): skipped, and reported.
      blankLineCount++;
      if (blankLines.length < BLANK_LINES_KEPT) blankLines.push(rowLine);
      continue;
    }
    if (!header) {
      header = headerFields;
      width = header.length;
      if (options.column !== undefined) {
        mIndex = header.indexOf(options.column);
        if (mIndex < 0) {
          throw Object.assign(new LotCsvError('column', `the header row has no column ${q(options.column)} (it has ${header.map(q).join(', ')})`, rowLine, 'column'), { header });
        }
      } else {
        mIndex = header.findIndex((h) => isNamed(h, MEASUREMENT_NAMES));
        if (mIndex < 0 && width === 1) mIndex = 0;
        if (mIndex < 0) {
          throw Object.assign(new LotCsvError('column', `no measurement column: the header row names ${header.map(q).join(', ')}; choose the column, or name it measurement, gross, net or weight`, rowLine, 'column'), { header });
        }
      }
      if (options.tareColumn) {
        tIndex = header.indexOf(options.tareColumn);
        if (tIndex < 0) throw Object.assign(new LotCsvError('column', `the header row has no column ${q(options.tareColumn)} (it has ${header.map(q).join(', ')})`, rowLine, 'tareColumn'), { header });
      } else if (options.tareColumn === undefined) tIndex = header.findIndex((h, i) => i !== mIndex && isNamed(h, TARE_NAMES));
      column = header[mIndex]!;
      tareColumn = tIndex >= 0 ? header[tIndex]! : null;
      if (tIndex >= 0) tares = new Float64Array(1024);
      continue;
    }
    if (fields !== width) {
      if (sep < 0 && splitBy === COMMA) {
        throw new LotCsvError(
          'ambiguous',
          `the header row has one column, but a comma splits this row: if it is a decimal comma, choose ?decimal=comma (or separate columns with semicolons); if it separates columns, name them all in the header row`,
          rowLine,
          'decimal',
          { decimal: ['comma'] },
        );
      }
      const hint =
        fields > width && delimiter === 'comma'
          ? ': is a decimal comma splitting a number? Then quote the value ("4,98") and choose ?decimal=comma, or separate the columns with semicolons'
          : '';
      throw new LotCsvError('malformed', `the header row has ${width} column${width === 1 ? '' : 's'}, this row has ${fields} field${fields === 1 ? '' : 's'}${hint}`, rowLine);
    }
    if (count >= maxRows) throw new LotCsvError('too-many', `more than ${maxRows} rows of packs`, rowLine);
    let v = plainDecimal(b, m.start, m.end, markByte);
    if (Number.isNaN(v)) v = slowNumber(m, rowLine, column);
    if (v < 0) throw new LotCsvError('value', `${text(m).trim()} in column ${q(column)} is negative; every value must be ≥ 0`, rowLine);
    let tare = 0;
    if (tares) {
      tare = plainDecimal(b, t.start, t.end, markByte);
      if (Number.isNaN(tare)) tare = slowNumber(t, rowLine, tareColumn!);
      if (tare < 0) throw new LotCsvError('value', `${text(t).trim()} in column ${q(tareColumn!)} is negative; every value must be ≥ 0`, rowLine);
    }
    if (count === lines.length) {
      const more = count * 2;
      const l = new Int32Array(more);
      l.set(lines);
      lines = l;
      const mm = new Float64Array(more);
      mm.set(measurements);
      measurements = mm;
      if (tares) {
        const tt = new Float64Array(more);
        tt.set(tares);
        tares = tt;
      }
    }
    lines[count] = rowLine;
    measurements[count] = v;
    if (tares) tares[count] = tare;
    count++;
  }
  if (!header) throw new LotCsvError('empty', 'the CSV is empty: it needs a header row and one row per pack', null);
  return {
    // copies of exactly the rows read, so each array owns its whole buffer (what moves to another thread is the buffer)
    measurements: measurements.slice(0, count),
    tares: tares ? tares.slice(0, count) : null,
    lines: lines.slice(0, count),
    header,
    column,
    tareColumn,
    delimiter,
    decimal,
    given: { delimiter: options.delimiter !== undefined, decimal: decimalGiven },
    blankLineCount,
    blankLines,
  };
}

/** Reads a lot's CSV at once (the console's preview; a small body). */
export function readLotCsv(bytes: Uint8Array, options: LotCsvOptions = {}): LotCsv {
  const steps = lotCsvSteps(bytes, options);
  for (;;) {
    const r = steps.next();
    if (r.done) return r.value;
  }
}

/** The header row of a CSV (its first row with anything in it), as the reader splits it; null if there is none or it cannot be read. */
export function csvHeader(bytes: Uint8Array, options: Pick<LotCsvOptions, 'delimiter'> = {}): string[] | null {
  try {
    readLotCsv(bytes, { ...options, column: '\u0000', tareColumn: null, maxRows: 0 });
  } catch (err) {
    if (err instanceof LotCsvError && err.fault === 'column') return err.header;
  }
  return null;
}
