// The CSV preview: what the quality engineer sees before a lot is sent (the shared reader, through
// console/src/lib/csv.ts; its fixtures are run in csv-fixtures.test.ts).
import { describe, expect, it } from 'vitest';
import { parseMeasurementsCsv } from '../../console/src/lib/csv';
import { previewLot, type LotForm } from '../../console/src/lib/preview';
import type { ProductSpec } from '../../shared/engine/types';

const product: ProductSpec = { nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211' } };
const form: LotForm = { lotCode: 'L-1', line: 'A', lotSize: 1000, testing: 'destructive', measurementUnit: 'g', measurementBasis: 'net' };

function csv(values: number[], header = 'measurement'): string {
  return [header, ...values.map(String)].join('\n');
}

describe('parseMeasurementsCsv', () => {
  it('reads the named measurement column and ignores the others', () => {
    const parsed = parseMeasurementsCsv('pack,weight,operator\n1,501.2,ann\n2,499.8,ben\n');
    expect(parsed.measurements).toEqual([501.2, 499.8]);
    expect(parsed.column).toBe('weight');
    expect(parsed.problems).toEqual([]);
  });

  it('reads a one-column file by its header, whatever its name', () => {
    expect(parseMeasurementsCsv('kg\n500.1\n499.9\n500.4').measurements).toEqual([500.1, 499.9, 500.4]);
  });

  it('needs a header row, as the server does: a first row of numbers is a header naming no measurement column', () => {
    expect(parseMeasurementsCsv('500.1,1\n499.9,2\n').problems[0]).toMatch(/^Line 1: no measurement column/);
  });

  it('reads decimal commas in a semicolon-separated file', () => {
    const parsed = parseMeasurementsCsv('gross;tare\n512,5;12,1\n513,0;12,3\n');
    expect(parsed.measurements).toEqual([512.5, 513]);
    expect(parsed.tares).toEqual([12.1, 12.3]);
  });

  it('names the line of a value that is not a number, and reads nothing from the file', () => {
    const parsed = parseMeasurementsCsv('measurement\n500\nabc\n501');
    expect(parsed.problems).toEqual(['Line 3: "abc" in column "measurement" is not a number.']);
    expect(parsed.measurements).toEqual([]);
  });

  it('reports the blank lines it skipped, and a measurement keeps the line it was on', () => {
    const parsed = parseMeasurementsCsv('net\n500\n\n501\n');
    expect(parsed.measurements).toEqual([500, 501]);
    expect(parsed.lines).toEqual([2, 4]);
    expect(parsed.blankLines).toEqual([3]);
  });

  it('says which header it could not use', () => {
    const parsed = parseMeasurementsCsv('pack,operator\n1,ann');
    expect(parsed.problems[0]).toMatch(/no measurement column.*"pack", "operator"/);
    expect(parsed.headers).toEqual(['pack', 'operator']);
  });
});

describe('previewLot', () => {
  it('gives the same decision the engine gives for a lot well above Qn', () => {
    const values = Array.from({ length: 50 }, (_, i) => 505 + ((i * 7) % 11) / 5);
    const preview = previewLot(product, form, parseMeasurementsCsv(csv(values)));
    expect(preview.ok).toBe(true);
    if (!preview.ok) return;
    expect(preview.verdict.decision).toBe('conforming');
    expect(preview.net).toHaveLength(50);
    expect(preview.verdict.net.t1Limit).toBe(485); // 76/211/EEC Annex I 2.4: TNE for 500 g is 3 % = 15 g
  });

  it('finds a lot whose mean is below Qn nonconforming', () => {
    const values = Array.from({ length: 50 }, (_, i) => 494 + ((i * 7) % 11) / 5);
    const preview = previewLot(product, form, parseMeasurementsCsv(csv(values)));
    expect(preview.ok && preview.verdict.decision).toBe('nonconforming');
  });

  it('refuses a lot size smaller than the sample, naming the field', () => {
    const preview = previewLot(product, { ...form, lotSize: 3 }, parseMeasurementsCsv(csv([500, 501, 502, 503, 504])));
    expect(preview.ok).toBe(false);
    if (preview.ok) return;
    expect(preview.pointer).toBe('/lot/lotSize');
    expect(preview.message).toMatch(/lot size 3 is smaller than the 5 packs/);
  });

  it('passes file problems through without running the engine', () => {
    const preview = previewLot(product, form, parseMeasurementsCsv('measurement\n500\n-\n'));
    expect(preview).toEqual({ ok: false, message: 'Line 3: "-" in column "measurement" is not a number.', pointer: null });
  });
});

describe('parseMeasurementsCsv column choice', () => {
  it('recognises a measurement column with a unit suffix', () => {
    expect(parseMeasurementsCsv('pack,gross_g\n1,514.2\n2,515.0').column).toBe('gross_g');
  });
  it('reads the column the user chose instead of the one found by name', () => {
    const parsed = parseMeasurementsCsv('net,check\n500,1\n501,2', { column: 'check' });
    expect(parsed.measurements).toEqual([1, 2]);
    expect(parsed.headers).toEqual(['net', 'check']);
  });
});
