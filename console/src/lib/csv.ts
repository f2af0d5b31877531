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

export function parseMeasurementsCsv(text: string): ParsedMeasurements {
  const result = Papa.parse<string[]>(text.replace(/^\uFEFF/, ''), { skipEmptyLines: 'greedy', delimitersToGuess: [',', ';', '\t', '|'] });
  const rows = result.data;
  const problems: string[] = [];
  const decimalComma = result.meta.delimiter === ';' || result.meta.delimiter === '\t';
  if (rows.length === 0) return { measurements: [], tares: null, column: 'column 1', hasHeader: false, problems: ['The file is empty.'] };

  const header = rows[0]!.map((h) => h.trim().toLowerCase());
  const headerIsText = header.some((h) => h !== '' && Number.isNaN(Number(h.replace(',', '.'))));
  let valueCol = 0;
  let tareCol = -1;
  let column = 'column 1';
  let start = 0;
  if (headerIsText) {
    start = 1;
    valueCol = header.findIndex((h) => MEASUREMENT_NAMES.includes(h));
    tareCol = header.findIndex((h) => TARE_NAMES.includes(h));
    if (valueCol < 0) {
      if (header.length === 1) valueCol = 0;
      else {
        return {
          measurements: [],
          tares: null,
          column: '',
          hasHeader: true,
          problems: [`No measurement column: the header names ${header.map((h) => `"${h}"`).join(', ')}; name one column measurement, gross, net or weight.`],
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
  return { measurements, tares: tareCol >= 0 ? tares : null, column, hasHeader: headerIsText, problems };
}
