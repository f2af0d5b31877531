// Reading a lot's measurements from a CSV file in the browser (papaparse), before anything is sent.
// Accepted: a header row naming the measurement column (measurement, gross, net, weight, value or
// quantity) and optionally a tare column; or a single column of numbers without a header.
// Decimal commas ("498,2") are read when the file is separated by semicolons.
import Papa from 'papaparse';

export interface ParsedMeasurements {
  measurements: number[];
  /** Per-pack tares when the file has a tare column. */
  tares: number[] | null;
  /** Name of the column read (or "column 1"). */
  column: string;
  /** Column names of the header row (empty without one), for choosing another column. */
  headers: string[];
  /** Whether the first row was a header (so file rows are measurement index + 2). */
  hasHeader: boolean;
  /** Problems, each naming the file's row (1-based, counting the header) so the user can find it. */
  problems: string[];
}

const MEASUREMENT_NAMES = ['measurement', 'measurements', 'gross', 'net', 'weight', 'value', 'quantity', 'mass', 'volume'];
const TARE_NAMES = ['tare', 'tares'];

function toNumber(raw: string, decimalComma: boolean): number | null {
  let s = raw.trim();
  if (s === '') return null;
  if (decimalComma) s = s.replace(',', '.');
  if (!/^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/.test(s)) return Number.NaN;
  return Number(s);
}

/** A header names a measurement column when it is one of the names, alone or with a unit suffix (gross_g, "net (g)"). */
function isNamed(header: string, names: readonly string[]): boolean {
  return names.some((n) => header === n || new RegExp(`^${n}[ _(\\[-]`).test(header));
}

export function parseMeasurementsCsv(text: string, opts: { column?: string } = {}): ParsedMeasurements {
  const result = Papa.parse<string[]>(text.replace(/^\uFEFF/, ''), { skipEmptyLines: 'greedy', delimitersToGuess: [',', ';', '\t', '|'] });
  const rows = result.data;
  const problems: string[] = [];
  const decimalComma = result.meta.delimiter === ';' || result.meta.delimiter === '\t';
  if (rows.length === 0) return { measurements: [], tares: null, column: 'column 1', hasHeader: false, headers: [], problems: ['The file is empty.'] };

  const header = rows[0]!.map((h) => h.trim().toLowerCase());
  const headerIsText = header.some((h) => h !== '' && Number.isNaN(Number(h.replace(',', '.'))));
  let valueCol = 0;
  let tareCol = -1;
  let column = 'column 1';
  let start = 0;
  if (headerIsText) {
    start = 1;
    const chosen = opts.column ? header.indexOf(opts.column.trim().toLowerCase()) : -1;
    valueCol = chosen >= 0 ? chosen : header.findIndex((h) => isNamed(h, MEASUREMENT_NAMES));
    tareCol = header.findIndex((h, i) => i !== valueCol && isNamed(h, TARE_NAMES));
    if (valueCol < 0) {
      if (header.length === 1) valueCol = 0;
      else {
        return {
          measurements: [],
          tares: null,
          column: '',
          hasHeader: true,
          headers: rows[0]!.map((h) => h.trim()),
          problems: [`No measurement column: the header names ${header.map((h) => `"${h}"`).join(', ')}; choose the column below, or name it measurement, gross, net or weight.`],
        };
      }
    }
    column = rows[0]![valueCol]!.trim() || 'column 1';
  }

  const measurements: number[] = [];
  const tares: number[] = [];
  for (let r = start; r < rows.length; r++) {
    const row = rows[r]!;
    const v = toNumber(row[valueCol] ?? '', decimalComma);
    if (v === null) {
      problems.push(`Row ${r + 1}: the ${column} cell is empty.`);
      continue;
    }
    if (!Number.isFinite(v)) {
      problems.push(`Row ${r + 1}: "${(row[valueCol] ?? '').trim()}" is not a number.`);
      continue;
    }
    if (v < 0) problems.push(`Row ${r + 1}: ${v} is negative.`);
    measurements.push(v);
    if (tareCol >= 0) {
      const t = toNumber(row[tareCol] ?? '', decimalComma);
      if (t === null || !Number.isFinite(t)) problems.push(`Row ${r + 1}: the tare "${(row[tareCol] ?? '').trim()}" is not a number.`);
      tares.push(t !== null && Number.isFinite(t) ? t : Number.NaN);
    }
  }
  if (measurements.length === 0 && problems.length === 0) problems.push('The file has a header but no measurements.');
  return { measurements, tares: tareCol >= 0 ? tares : null, column, hasHeader: headerIsText, headers: headerIsText ? rows[0]!.map((h) => h.trim()) : [], problems };
}
