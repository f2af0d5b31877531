/**
 * Tolerable negative error (TNE) tables.
 *
 * EU Council Directive 76/211/EEC, Annex I, 2.4 (as amended by 78/891/EEC), scope 5 g or mL to
 * 10 kg or L. A TNE given as a percentage, once turned into grams or millilitres, is rounded up to
 * the next 0.1 g or mL (Annex I, 2.4). The table is continuous at every boundary, so which row owns
 * a boundary does not change the value.
 *
 * OIML R 87 (2016) uses the same table and extends it above 10 kg: 10 000 to 15 000 → 150 g;
 * above 15 000 → 1 % of Qn. These two rows were written from memory; the UK government's
 * published table (gov.uk, "Weights and measures: the law — Packaged goods", rows "10,000 to
 * 15,000 | 150" and "more than 15,000 | 1 %", percentages rounded up to 0.1 g) gives the same;
 * the text of R 87 itself could not be read here.
 */
import type { TneResult, Unit } from '../types';
import { baseFactor, baseUnitOf, conversionFactor, isUnit } from '../../../units';
import { formatNumber } from '../../../format';

/** A row: Qn in (above, upTo] (the first row also includes its lower end); either a percentage in tenths of a per cent, or a fixed value. */
interface TneRow {
  above: number;
  upTo: number;
  /** Per mille of Qn (e.g. 90 = 9 %), or null for a fixed value. */
  perMille: number | null;
  fixed: number | null;
}

export const EU_TNE_TABLE: readonly TneRow[] = [
  { above: 5, upTo: 50, perMille: 90, fixed: null },
  { above: 50, upTo: 100, perMille: null, fixed: 4.5 },
  { above: 100, upTo: 200, perMille: 45, fixed: null },
  { above: 200, upTo: 300, perMille: null, fixed: 9 },
  { above: 300, upTo: 500, perMille: 30, fixed: null },
  { above: 500, upTo: 1000, perMille: null, fixed: 15 },
  { above: 1000, upTo: 10000, perMille: 15, fixed: null },
];

/** OIML R 87 (2016) rows above 10 000 g or mL — as in the UK government's published TNE table (R 87's own text not read). */
export const OIML_TNE_EXTENSION: readonly TneRow[] = [
  { above: 10000, upTo: 15000, perMille: null, fixed: 150 },
  { above: 15000, upTo: Number.POSITIVE_INFINITY, perMille: 10, fixed: null },
];

/**
 * Rounds a percentage TNE up to the next 0.1 (Directive 76/211/EEC Annex I, 2.4), in integer
 * tenths so that a value already on a 0.1 step (e.g. 3 % of 330 = 9.9) is not pushed up by a
 * binary rounding error.
 */
export function roundUpToTenth(qn: number, perMille: number): number {
  const tenths = (qn * perMille) / 100;
  const nearest = Math.round(tenths);
  const onStep = Math.abs(tenths - nearest) <= 1e-9 * Math.max(1, Math.abs(tenths));
  return (onStep ? nearest : Math.ceil(tenths)) / 10;
}

function rowLabel(row: TneRow): string {
  const range = Number.isFinite(row.upTo)
    ? `${formatNumber(row.above)} to ${formatNumber(row.upTo)}`
    : `above ${formatNumber(row.above)}`;
  return row.perMille !== null
    ? `Qn ${range}: ${formatNumber(row.perMille / 10)} % of Qn, rounded up to 0.1`
    : `Qn ${range}: ${formatNumber(row.fixed as number)}`;
}

/** TNE in g or mL for Qn in g or mL, from the given table; null outside the table's scope. */
export function tneInBaseUnit(qnBase: number, table: readonly TneRow[]): { value: number; rule: string } | null {
  const first = table[0];
  if (first === undefined || !(qnBase >= first.above)) return null;
  for (const row of table) {
    if (qnBase <= row.upTo) {
      const value = row.perMille !== null ? roundUpToTenth(qnBase, row.perMille) : (row.fixed as number);
      return { value, rule: rowLabel(row) };
    }
  }
  return null;
}

/** The TNE table a rulebook uses; custom uses the EU table for information only. */
export function tneTableFor(rulebookId: string): readonly TneRow[] {
  return rulebookId === 'oiml-r87-2016' ? [...EU_TNE_TABLE, ...OIML_TNE_EXTENSION] : EU_TNE_TABLE;
}

/**
 * Tolerable negative error for a nominal quantity `qn` declared in `unit`, in that unit and in
 * g or mL, by the rulebook's table (default eu-76-211).
 */
export function tolerableNegativeError(qn: number, unit: Unit, rulebookId: string = 'eu-76-211'): TneResult {
  if (!isUnit(unit)) return { ok: false, reason: `unknown unit ${JSON.stringify(unit)}` };
  if (!Number.isFinite(qn) || !(qn > 0)) return { ok: false, reason: 'the nominal quantity must be a finite number > 0' };
  if (rulebookId !== 'eu-76-211' && rulebookId !== 'oiml-r87-2016' && rulebookId !== 'custom') {
    return { ok: false, reason: `unknown rulebook ${JSON.stringify(rulebookId)}` };
  }
  const baseUnit = baseUnitOf(unit);
  const qnBase = qn * baseFactor(unit);
  const table = tneTableFor(rulebookId);
  const found = tneInBaseUnit(qnBase, table);
  if (found === null) {
    const last = table[table.length - 1]!;
    const upper = Number.isFinite(last.upTo) ? ` to ${formatNumber(last.upTo)} ${baseUnit}` : '';
    return {
      ok: false,
      reason: `Qn ${formatNumber(qnBase)} ${baseUnit} is outside the TNE table's scope (${formatNumber(table[0]!.above)} ${baseUnit}${upper})`,
    };
  }
  const back = conversionFactor(baseUnit, unit) as number;
  return { ok: true, value: found.value * back, unit, baseValue: found.value, baseUnit, rule: found.rule };
}
