// Reading a lot's measurements from a CSV file in the browser, before anything is sent: the shared
// reader (shared/csv/lot-csv.ts), the one the server runs on a text/csv lot, so a file reads the
// same way in both. A header row names the measurement column (chosen, or found by its name:
// measurement, gross, net, weight, …; a tare column by "tare"). The delimiter and the decimal
// separator are found in the file or chosen; an ambiguous file says what to choose.
import { csvHeader, LotCsvError, readLotCsv, type DecimalMark, type Delimiter } from '../../../shared/csv/lot-csv';

export type { DecimalMark, Delimiter } from '../../../shared/csv/lot-csv';

export interface ParsedMeasurements {
  measurements: number[];
  /** Per-pack tares when the file has a tare column. */
  tares: number[] | null;
  /** Name of the column read. */
  column: string;
  /** Column names of the header row (empty when it could not be read), for choosing another column. */
  headers: string[];
  /** Always true: the reader needs a header row (kept for the preview's row numbers). */
  hasHeader: boolean;
  /** The line in the file of each measurement. */
  lines: number[];
  /** What separated the columns (null: one column) and the decimal separator (null: no value had one). */
  delimiter: Delimiter | null;
  decimal: DecimalMark | null;
  /** Blank rows skipped: how many, and the lines of the first hundred. */
  blankLineCount: number;
  blankLines: number[];
  /** Why the file cannot be read (one problem, naming its line), empty when it was read. */
  problems: string[];
  /** What to choose for the file to be read, when it is ambiguous. */
  choose: { delimiter?: Delimiter[]; decimal?: DecimalMark[] };
}

export interface CsvChoices {
  /** The measurement column; omitted: found by its name. */
  column?: string;
  /** Omitted: found in the file. */
  delimiter?: Delimiter;
  decimal?: DecimalMark;
}

const EMPTY = { measurements: [], tares: null, column: '', headers: [], hasHeader: true, lines: [], delimiter: null, decimal: null, blankLineCount: 0, blankLines: [], problems: [], choose: {} };

function sentence(text: string): string {
  return `${text.charAt(0).toUpperCase()}${text.slice(1)}${/[.!?]$/.test(text) ? '' : '.'}`;
}

export function parseMeasurementsCsv(input: string | Uint8Array, choices: CsvChoices = {}): ParsedMeasurements {
  const bytes = typeof input === 'string' ? new TextEncoder().encode(input) : input;
  try {
    const lot = readLotCsv(bytes, { column: choices.column || undefined, delimiter: choices.delimiter, decimal: choices.decimal });
    const parsed: ParsedMeasurements = {
      ...EMPTY,
      measurements: Array.from(lot.measurements),
      tares: lot.tares ? Array.from(lot.tares) : null,
      column: lot.column,
      headers: lot.header,
      lines: Array.from(lot.lines),
      delimiter: lot.delimiter,
      decimal: lot.decimal,
      blankLineCount: lot.blankLineCount,
      blankLines: lot.blankLines,
    };
    if (parsed.measurements.length === 0) parsed.problems = ['The file has a header but no measurements.'];
    return parsed;
  } catch (err) {
    if (!(err instanceof LotCsvError)) throw err;
    const text = err.line === null ? sentence(err.detail) : `Line ${err.line}: ${err.detail}${/[.!?]$/.test(err.detail) ? '' : '.'}`;
    return { ...EMPTY, headers: err.header ?? csvHeader(bytes, { delimiter: choices.delimiter }) ?? [], problems: [text], choose: err.choose };
  }
}

export const DELIMITER_LABELS: Record<Delimiter, string> = { comma: 'comma', semicolon: 'semicolon', tab: 'tab' };
export const DECIMAL_LABELS: Record<DecimalMark, string> = { point: 'decimal point', comma: 'decimal comma' };

/** What was read, in words: "3 rows from “net_g” · comma-separated · decimal point · blank lines skipped: 3, 5". */
export function readingSummary(p: ParsedMeasurements): string {
  const parts = [`${p.measurements.length} row${p.measurements.length === 1 ? '' : 's'} from “${p.column}”`];
  parts.push(p.delimiter ? `${DELIMITER_LABELS[p.delimiter]}-separated` : 'one column');
  if (p.decimal) parts.push(DECIMAL_LABELS[p.decimal]);
  if (p.blankLineCount > 0) {
    const more = p.blankLineCount > p.blankLines.length ? ` and ${p.blankLineCount - p.blankLines.length} more` : '';
    parts.push(`blank line${p.blankLineCount === 1 ? '' : 's'} skipped: ${p.blankLines.join(', ')}${more}`);
  }
  return parts.join(' · ');
}
