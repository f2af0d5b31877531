// The lot form's pure parts (issue 16): weights keyed in a grid (components/lot-entry/manualEntry.ts),
// the plausibility preview (lib/preview.ts over shared/plausibility.ts), a lot code judged before
// (lib/lotRecognition.ts), and a short seal in the seal lookup (stores/seals.ts sealQuery).
import { describe, expect, it } from 'vitest';
import { decimalMarkOf, pastedColumn, pasteInto, readCell, readGrid } from '../../console/src/components/lot-entry/manualEntry';
import { previewLot, type LotForm } from '../../console/src/lib/preview';
import { knownLotFromConflict, retestReasonProblem } from '../../console/src/lib/lotRecognition';
import { sealQuery } from '../../console/src/stores/seals';
import type { ProductSpec } from '../../shared/engine/types';

describe('the decimal separator of the grid, by the browser locale', () => {
  // CLDR common/main/de.xml and en.xml: decimal "," and "."
  it('is the comma in German and the point in English', () => {
    expect(decimalMarkOf('de-DE')).toBe('comma');
    expect(decimalMarkOf('en-GB')).toBe('point');
  });
});

describe('a cell of the grid', () => {
  it('reads a value with the chosen separator, never cutting it short', () => {
    expect(readCell('498,75', 'comma')).toEqual({ ok: true, value: 498.75 });
    expect(readCell(' 502.4 ', 'point')).toEqual({ ok: true, value: 502.4 });
    expect(readCell('500', 'comma')).toEqual({ ok: true, value: 500 });
    expect(readCell('1000000000000', 'point')).toEqual({ ok: true, value: 1e12 });
  });
  it('names a value with the other separator, a negative, a word, or one above 1e12, and reads none of them', () => {
    expect(readCell('498.5', 'comma')).toMatchObject({ ok: false, message: expect.stringContaining('decimal separator chosen is the comma') });
    expect(readCell('4,980', 'point')).toMatchObject({ ok: false, message: expect.stringContaining('has a comma') });
    expect(readCell('-3', 'point')).toMatchObject({ ok: false, message: expect.stringContaining('negative') });
    expect(readCell('abc', 'point')).toMatchObject({ ok: false, message: expect.stringContaining('not a number') });
    expect(readCell('1,2,3', 'comma')).toMatchObject({ ok: false });
    // LotSubmission.measurements: each at most 1e12 (openapi/parts/verdicts.yaml)
    expect(readCell('1000000000001', 'point')).toMatchObject({ ok: false });
    expect(readCell('', 'point')).toEqual({ ok: 'empty' });
  });
});

describe('a pasted column', () => {
  it('takes one value a line, the first field of a spreadsheet row, and drops the trailing line end', () => {
    expect(pastedColumn('501,2\r\n499,8\r\n')).toEqual(['501,2', '499,8']);
    expect(pastedColumn('501.2\tA\n499.8\tB')).toEqual(['501.2', '499.8']);
  });
  it('fills the rows from the cell it is pasted into, adding rows as needed', () => {
    expect(pasteInto(['1', '', ''], 1, ['2', '3', '4'])).toEqual(['1', '2', '3', '4']);
  });
});

describe('the grid as measurements', () => {
  it('reads the packs in order and leaves trailing empty rows out', () => {
    const r = readGrid(['501,5', '499', '', ''], 'comma');
    expect(r.parsed?.measurements).toEqual([501.5, 499]);
    expect(r.parsed?.problems).toEqual([]);
    expect(r.cellErrors).toEqual({});
  });
  it('names an empty row between packs and a cell it cannot read, and reads nothing then', () => {
    const r = readGrid(['501', '', '498.5', '500'], 'comma');
    expect(Object.keys(r.cellErrors)).toEqual(['1', '2']);
    expect(r.cellErrors[1]).toContain('Pack 2 is empty');
    expect(r.parsed?.measurements).toEqual([]);
    expect(r.parsed?.problems[0]).toMatch(/^Pack 2 is empty.*\(and 1 more row to correct\)\.$/);
  });
  it('gives nothing for an empty grid', () => {
    expect(readGrid(['', ''], 'point').parsed).toBeNull();
  });
});

describe('the preview of a lot with a pack of 1e12 g', () => {
  const product: ProductSpec = { nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211' } };
  const form: LotForm = { lotCode: 'L-1', line: '', lotSize: 2400, testing: 'non-destructive', measurementUnit: 'g', measurementBasis: 'net' };
  const cells = Array.from({ length: 50 }, (_, i) => (i === 17 ? '1000000000000' : String(500 + (i % 7))));
  it('names the pack outside the band, as the server would (0.5 to 2 × Qn by default, shared/plausibility.ts)', () => {
    const p = previewLot(product, form, readGrid(cells, 'point').parsed!, { source: 'grid' });
    expect(p.ok).toBe(true);
    if (!p.ok) return;
    expect(p.plausibility).toMatchObject({ lower: 250, upper: 1000, unit: 'g', count: 1 });
    expect(p.plausibility.packs).toEqual([{ index: 17, line: 18, net: 1e12 }]);
  });
  it('uses the product’s own band when it has one', () => {
    const p = previewLot(product, form, readGrid(cells.map((c, i) => (i === 17 ? '560' : c)), 'point').parsed!, { source: 'grid', band: { minFraction: 0.9, maxFraction: 1.1 } });
    expect(p.ok && p.plausibility.packs.map((x) => x.index)).toEqual([17]);
  });
  it('speaks of packs, not file lines, when the grid cannot be judged', () => {
    const p = previewLot(product, { ...form, lotSize: 3 }, readGrid(['500', '501', '502', '503', '504'], 'point').parsed!, { source: 'grid' });
    expect(p.ok).toBe(false);
    expect(!p.ok && p.message).not.toMatch(/line|row/i);
  });
});

describe('a lot judged before, from the 409 that refuses it', () => {
  const type = 'https://lotproof.dev/problems/lot-already-judged';
  it('offers a re-test of the verdict named, and the second sample when that verdict awaits one', () => {
    expect(knownLotFromConflict({ type, verdict: { id: 'v1', decision: 'conforming', href: '/v1/verdicts/v1' } }, 'L-7')).toEqual({
      latest: { id: 'v1', decision: 'conforming', recordedAt: null, lotCode: 'L-7' },
      secondSamplePacks: null,
      offers: ['retest'],
    });
    expect(knownLotFromConflict({ type, verdict: { id: 'v2', decision: 'second-sample-required' } }, 'L-8')?.offers).toEqual(['second-sample', 'retest']);
  });
  it('is nothing for another problem', () => {
    expect(knownLotFromConflict({ type: 'https://lotproof.dev/problems/validation' }, 'L-7')).toBeNull();
  });
  it('needs a reason of 1 to 500 characters for a re-test (LotSubmission.retest.reason)', () => {
    expect(retestReasonProblem('  ')).toMatch(/Say why/);
    expect(retestReasonProblem('x'.repeat(501))).toMatch(/at most 500/);
    expect(retestReasonProblem('scale out of calibration')).toBeNull();
  });
});

describe('a short seal in the seal lookup', () => {
  const seal = '3f9c0a12bd'.padEnd(58, '7') + 'e41a07';
  it('takes the full seal, its first 8 or more digits, or the short form the lists show', () => {
    expect(sealQuery(seal.toUpperCase())).toEqual({ prefix: seal, suffix: null });
    expect(sealQuery('3f9c0a12')).toEqual({ prefix: '3f9c0a12', suffix: null });
    // format.ts shortSeal: first 10 and last 6 characters around an ellipsis
    expect(sealQuery('3f9c0a12bd…e41a07')).toEqual({ prefix: '3f9c0a12bd', suffix: 'e41a07' });
  });
  it('is nothing for fewer than 8 digits or a character that is not hex', () => {
    expect(sealQuery('3f9c0a1')).toBeNull();
    expect(sealQuery('3f9c0a12zz')).toBeNull();
    expect(sealQuery('{"seal":"x"}')).toBeNull();
  });
});
