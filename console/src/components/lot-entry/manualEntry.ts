// Weights keyed in from a bench scale, one pack a row: what the grid holds, read the way the CSV
// reader reads a value (shared/csv/lot-csv.ts): one decimal separator, chosen (by default the
// browser's), no thousands separators, never a number cut short. A cell that cannot be read, or an
// empty row between packs, is named, never skipped in silence. Pure: the grid component and its
// tests use it.
import type { ParsedMeasurements } from '../../lib/csv';

export type DecimalMark = 'point' | 'comma';

/** The browser locale's decimal separator (CLDR: "," in de, fr, nl…; "." in en). */
export function decimalMarkOf(locale: string): DecimalMark {
  const part = new Intl.NumberFormat(locale).formatToParts(1.5).find((p) => p.type === 'decimal');
  return part?.value === ',' ? 'comma' : 'point';
}

/** The largest value the API takes for a measurement (LotSubmission.measurements, 1e12). */
export const MAX_VALUE = 1e12;

export type CellReading = { ok: true; value: number } | { ok: false; message: string } | { ok: 'empty' };

const MARK = { point: '.', comma: ',' } as const;

/** One cell's text as a number, with the chosen decimal separator; anything else is said in words. */
export function readCell(text: string, decimal: DecimalMark): CellReading {
  const t = text.trim().replace(/^\+/, '');
  if (t === '') return { ok: 'empty' };
  const mine = MARK[decimal];
  const other = decimal === 'comma' ? '.' : ',';
  if (t.includes(other)) {
    return { ok: false, message: `“${t}” has a ${other === ',' ? 'comma' : 'point'}; the decimal separator chosen is the ${decimal === 'comma' ? 'comma' : 'point'} (write ${decimal === 'comma' ? '498,5' : '498.5'})` };
  }
  if (t.startsWith('-')) return { ok: false, message: `“${t}” is negative; a weight is 0 or more` };
  const pattern = decimal === 'comma' ? /^\d+(?:,\d+)?$/ : /^\d+(?:\.\d+)?$/;
  if (!pattern.test(t)) return { ok: false, message: `“${t}” is not a number` };
  const value = Number(t.replace(mine, '.'));
  if (value > MAX_VALUE) return { ok: false, message: `“${t}” is above 10^12, the largest value a lot takes` };
  return { ok: true, value };
}

/** Values pasted into one cell: a column (one a line; from a spreadsheet, the first field of each line). */
export function pastedColumn(text: string): string[] {
  const lines = text.replace(/\r\n?/g, '\n').split('\n');
  while (lines.length > 0 && lines[lines.length - 1]!.trim() === '') lines.pop();
  return lines.map((l) => l.split('\t')[0]!.trim());
}

/** Rows pasted at `at`: the grid's cells with the pasted ones written over from there (rows added as needed). */
export function pasteInto(cells: readonly string[], at: number, pasted: readonly string[]): string[] {
  const out = [...cells];
  pasted.forEach((v, k) => {
    out[at + k] = v;
  });
  for (let i = 0; i < out.length; i++) if (out[i] === undefined) out[i] = '';
  return out;
}

export interface GridReading {
  /** The grid as the preview reads a file: pack k's value and its row number (1-based). */
  parsed: ParsedMeasurements | null;
  /** Per row: the message of a cell that cannot be read. */
  cellErrors: Record<number, string>;
}

/**
 * The grid's rows as measurements: trailing empty rows are not packs; an empty row before the last
 * value, or a value that cannot be read, is a problem naming its pack. `tares` (per-pack tare
 * mode): a second column, read the same way.
 */
export function readGrid(cells: readonly string[], decimal: DecimalMark, tares?: readonly string[]): GridReading {
  let last = cells.length - 1;
  const emptyAt = (i: number) => cells[i]!.trim() === '' && (!tares || (tares[i] ?? '').trim() === '');
  while (last >= 0 && emptyAt(last)) last--;
  if (last < 0) return { parsed: null, cellErrors: {} };
  const values: number[] = [];
  const tareValues: number[] = [];
  const cellErrors: Record<number, string> = {};
  const problems: string[] = [];
  for (let i = 0; i <= last; i++) {
    const r = readCell(cells[i]!, decimal);
    if (r.ok === 'empty') cellErrors[i] = `Pack ${i + 1} is empty: key its weight, or remove the row`;
    else if (r.ok === false) cellErrors[i] = `Pack ${i + 1}: ${r.message}`;
    else values.push(r.value);
    if (tares) {
      const tr = readCell(tares[i] ?? '', decimal);
      if (tr.ok === 'empty') cellErrors[i] ??= `Pack ${i + 1} has no tare`;
      else if (tr.ok === false) cellErrors[i] ??= `Pack ${i + 1}, tare: ${tr.message}`;
      else tareValues.push(tr.value);
    }
  }
  const errorRows = Object.keys(cellErrors).map(Number);
  if (errorRows.length > 0) {
    const first = cellErrors[errorRows[0]!]!;
    problems.push(errorRows.length === 1 ? `${first}.` : `${first} (and ${errorRows.length - 1} more row${errorRows.length === 2 ? '' : 's'} to correct).`);
  }
  const parsed: ParsedMeasurements = {
    measurements: problems.length ? [] : values,
    tares: tares && !problems.length ? tareValues : null,
    column: 'keyed in',
    headers: [],
    hasHeader: false,
    lines: values.map((_, i) => i + 1),
    delimiter: null,
    decimal: null,
    blankLineCount: 0,
    blankLines: [],
    problems,
    choose: {},
  };
  return { parsed, cellErrors };
}
