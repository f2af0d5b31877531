/**
 * Tolerable negative error (TNE) tables — the "limit of error" a pack may fall short by — and
 * their rounding rules. Each table says where it comes from; the rulebooks pick theirs.
 *
 * - EU: Council Directive 76/211/EEC, Annex I 2.4 (as amended by 78/891/EEC), 5 g or mL to 10 kg
 *   or L; a percentage TNE rounded up to the next 0.1 g or mL.
 * - UK: the same rows to 10 kg and, above, the OIML R 87 rows (10 000–15 000 → 150; over 15 000 →
 *   1 %) up to the UK scope of 25 kg / 25 L (gov.uk guidance on SI 2006/659; markets.md §1.9).
 * - OIML R 87 (2016), as reproduced in Australia's NTMR 2009 reg 4.36(4) and China's JJF 1070
 *   附表3: 0 to 50 kg; a percentage TNE rounded up to the next 0.1 g or mL for Qn ≤ 1 000 and to
 *   the next whole g or mL above (reg 4.36(4) note a; 附表3 note). markets.md §1.1–1.2.
 * - Canada: C.R.C. c. 1605 Schedule II, Parts V (metric), VI (Canadian mass, oz), VII (Canadian
 *   volume, imperial fl oz) and XIV (count); no rounding rule is stated for Parts V–VII; Part XIV
 *   rounds a percentage up (to a whole article).
 * - Australia, count: NTMR 2009 reg 4.36(4): 50 or fewer none; over 50 1 %, rounded up.
 *
 * Every table is continuous at its row boundaries where it says so (9 % of 50 = 4.5; 4.5 % of
 * 200 = 9; 3 % of 500 = 15; 1.5 % of 1 000 = 15; 1.5 % of 10 000 = 150; 1 % of 15 000 = 150), so
 * which row owns a boundary does not change the value. Rows here own their upper end.
 */
import type { TneResult, Unit } from '../types';
import { conversionFactor, dimensionOf, isUnit } from '../units';
import { formatNumber } from '../format';

/** A row: Qn in (above, upTo] (the first row also includes its lower end); a percentage in per mille, or a fixed value. */
export interface TneRow {
  above: number;
  upTo: number;
  /** Per mille of Qn (e.g. 90 = 9 %), or null for a fixed value. */
  perMille: number | null;
  fixed: number | null;
}

/**
 * How a percentage TNE is rounded: up to 0.1 ('tenth'); up to 0.1 up to Qn 1 000 and up to a whole
 * unit above ('r87'); up to a whole article ('whole'); not at all ('none').
 */
export type TneRounding = 'tenth' | 'r87' | 'whole' | 'none';

export interface TneTable {
  /** Where the table comes from (clause included). */
  source: string;
  /** The unit the table is stated in: 'metric' (g for mass, mL for volume), or one unit. */
  stated: 'metric' | 'oz' | 'imp fl oz' | 'count';
  rows: readonly TneRow[];
  rounding: TneRounding;
}

const pct = (above: number, upTo: number, perMille: number): TneRow => ({ above, upTo, perMille, fixed: null });
const fix = (above: number, upTo: number, fixed: number): TneRow => ({ above, upTo, perMille: null, fixed });
const INF = Number.POSITIVE_INFINITY;

/** Directive 76/211/EEC Annex I 2.4: 5 to 10 000 g or mL. */
export const EU_TNE_ROWS: readonly TneRow[] = [pct(5, 50, 90), fix(50, 100, 4.5), pct(100, 200, 45), fix(200, 300, 9), pct(300, 500, 30), fix(500, 1000, 15), pct(1000, 10000, 15)];

/** OIML R 87 (2016) as reproduced in NTMR 2009 reg 4.36(4) and JJF 1070 附表3: 0 to 50 000 g or mL. */
export const R87_TNE_ROWS: readonly TneRow[] = [
  pct(0, 50, 90),
  fix(50, 100, 4.5),
  pct(100, 200, 45),
  fix(200, 300, 9),
  pct(300, 500, 30),
  fix(500, 1000, 15),
  pct(1000, 10000, 15),
  fix(10000, 15000, 150),
  pct(15000, 50000, 10),
];

export const EU_TNE: TneTable = { source: 'Directive 76/211/EEC Annex I 2.4', stated: 'metric', rows: EU_TNE_ROWS, rounding: 'tenth' };

export const UK_TNE: TneTable = {
  source: 'SI 2006/659 (TNE table as the Directive to 10 kg, the OIML R 87 rows above, to 25 kg; gov.uk guidance)',
  stated: 'metric',
  rows: [...EU_TNE_ROWS, fix(10000, 15000, 150), pct(15000, 25000, 10)],
  rounding: 'tenth',
};

export const R87_TNE: TneTable = {
  source: 'OIML R 87 (2016) TNE table, as reproduced in NTMR 2009 reg 4.36(4) and JJF 1070 附表3',
  stated: 'metric',
  rows: R87_TNE_ROWS,
  rounding: 'r87',
};

export const AU_TNE: TneTable = { source: 'NTMR 2009 reg 4.36(4) and note a', stated: 'metric', rows: R87_TNE_ROWS, rounding: 'r87' };

export const AU_COUNT_TNE: TneTable = { source: 'NTMR 2009 reg 4.36(4) (count)', stated: 'count', rows: [fix(0, 50, 0), pct(50, INF, 10)], rounding: 'whole' };

export const CN_TNE: TneTable = { source: 'JJF 1070 附表3', stated: 'metric', rows: R87_TNE_ROWS, rounding: 'r87' };

/** NZ Schedule 7A Table 2: the R 87 rows, the last one open above 15 000 (its rounding rule not read: R 87's is used). */
export const NZ_TNE: TneTable = {
  source: 'NZ Weights and Measures Regulations 1999 Sch. 7A Table 2 (the R 87 rows; rounding as R 87)',
  stated: 'metric',
  rows: [...R87_TNE_ROWS.slice(0, -1), pct(15000, INF, 10)],
  rounding: 'r87',
};

/** Canada C.R.C. c. 1605 Sch. II Part V: metric units of mass or volume (no rounding rule stated). */
export const CA_METRIC_TNE: TneTable = {
  source: 'C.R.C. c. 1605 Sch. II Part V',
  stated: 'metric',
  rows: [...R87_TNE_ROWS.slice(0, -1), pct(15000, INF, 10)],
  rounding: 'none',
};

/** Canada Part VI (Canadian mass, ounces): 1.1 lb = 17.6 oz, 2.2 lb = 35.2 oz, 22 lb = 352 oz, 33 lb = 528 oz. */
export const CA_MASS_TNE: TneTable = {
  source: 'C.R.C. c. 1605 Sch. II Part VI',
  stated: 'oz',
  rows: [pct(0, 1.75, 90), fix(1.75, 3.5, 0.16), pct(3.5, 7, 45), fix(7, 10.6, 0.32), pct(10.6, 17.6, 30), fix(17.6, 35.2, 0.53), pct(35.2, 352, 15), fix(352, 528, 5.28), pct(528, INF, 10)],
  rounding: 'none',
};

/** Canada Part VII (Canadian volume, imperial fl oz): 0.22 gal = 35.2 fl oz, 2.2 gal = 352 fl oz, 3.3 gal = 528 fl oz. */
export const CA_VOLUME_TNE: TneTable = {
  source: 'C.R.C. c. 1605 Sch. II Part VII',
  stated: 'imp fl oz',
  rows: [pct(0, 1.75, 90), fix(1.75, 3.5, 0.16), pct(3.5, 7, 45), fix(7, 10.6, 0.32), pct(10.6, 17.6, 30), fix(17.6, 35.2, 0.53), pct(35.2, 352, 15), fix(352, 528, 5.28), pct(528, INF, 10)],
  rounding: 'none',
};

/** Canada Part XIV (count): under 50 none; 50 to 100 one article; over 100, 0.75 % (≤ 14 g each) or 0.5 % (over 14 g), rounded up. */
export function caCountTne(articleMassOver14g: boolean): TneTable {
  return {
    source: 'C.R.C. c. 1605 Sch. II Part XIV',
    stated: 'count',
    rows: [fix(0, 49, 0), fix(49, 100, 1), pct(100, INF, articleMassOver14g ? 5 : 7.5)],
    rounding: 'whole',
  };
}

/** True when `x` lies on a multiple of `step` up to binary rounding (e.g. 3 % of 330 = 9.9 in tenths). */
function roundUpTo(value: number, stepsPerUnit: number): number {
  const steps = value * stepsPerUnit;
  const nearest = Math.round(steps);
  const onStep = Math.abs(steps - nearest) <= 1e-9 * Math.max(1, Math.abs(steps));
  return (onStep ? nearest : Math.ceil(steps)) / stepsPerUnit;
}

/**
 * Rounds a percentage TNE up to the next 0.1 (Directive 76/211/EEC Annex I, 2.4), in integer
 * tenths so that a value already on a 0.1 step (e.g. 3 % of 330 = 9.9) is not pushed up by a
 * binary rounding error.
 */
export function roundUpToTenth(qn: number, perMille: number): number {
  return roundUpTo((qn * perMille) / 1000, 10);
}

function percentageTne(qn: number, perMille: number, rounding: TneRounding): number {
  const raw = (qn * perMille) / 1000;
  switch (rounding) {
    case 'tenth':
      return roundUpTo(raw, 10);
    case 'r87':
      // OIML R 87 as NTMR 2009 reg 4.36(4) note a and JJF 1070 附表3 print it: 0.1 up to 1 000, whole above.
      return qn > 1000 ? roundUpTo(raw, 1) : roundUpTo(raw, 10);
    case 'whole':
      return roundUpTo(raw, 1);
    case 'none':
      return raw;
  }
}

function rowLabel(row: TneRow, rounding: TneRounding): string {
  const range = Number.isFinite(row.upTo) ? `${formatNumber(row.above)} to ${formatNumber(row.upTo)}` : `above ${formatNumber(row.above)}`;
  const how = { tenth: ', rounded up to 0.1', r87: ', rounded up to 0.1 (whole units above 1 000)', whole: ', rounded up to a whole unit', none: '' }[rounding];
  return row.perMille !== null ? `Qn ${range}: ${formatNumber(row.perMille / 10)} % of Qn${how}` : `Qn ${range}: ${formatNumber(row.fixed as number)}`;
}

/** TNE for Qn stated in the table's own unit; null outside the table's scope. */
export function tneInTableUnit(qn: number, table: TneTable): { value: number; rule: string } | null {
  const first = table.rows[0];
  if (first === undefined || !(qn >= first.above) || !(qn > 0)) return null;
  for (const row of table.rows) {
    if (qn <= row.upTo) {
      const value = row.perMille !== null ? percentageTne(qn, row.perMille, table.rounding) : (row.fixed as number);
      return { value, rule: `${rowLabel(row, table.rounding)} (${table.source})` };
    }
  }
  return null;
}

/** The unit a table states Qn and TNE in, for a declaration in `unit`; null when the table does not take that dimension. */
export function statedUnit(table: TneTable, unit: Unit): Unit | null {
  const d = dimensionOf(unit);
  if (table.stated === 'metric') return d === 'mass' ? 'g' : d === 'volume' ? 'mL' : null;
  if (table.stated === 'oz') return d === 'mass' ? 'oz' : null;
  if (table.stated === 'imp fl oz') return d === 'volume' ? 'imp fl oz' : null;
  return d === 'count' ? 'count' : null;
}

/** TNE of a nominal quantity `qn` declared in `unit`, by `table`: in `unit` and as the table states it. */
export function tneByTable(qn: number, unit: Unit, table: TneTable): TneResult {
  if (!isUnit(unit)) return { ok: false, reason: `unknown unit ${JSON.stringify(unit)}` };
  if (!Number.isFinite(qn) || !(qn > 0)) return { ok: false, reason: 'the nominal quantity must be a finite number > 0' };
  const stated = statedUnit(table, unit);
  if (stated === null) return { ok: false, reason: `the TNE table (${table.source}) does not take a quantity in ${unit}` };
  const qnStated = qn * (conversionFactor(unit, stated) as number);
  const found = tneInTableUnit(qnStated, table);
  if (found === null) {
    const first = table.rows[0]!.above;
    const last = table.rows[table.rows.length - 1]!.upTo;
    const scope = Number.isFinite(last) ? `${formatNumber(first)} to ${formatNumber(last)} ${stated}` : `above ${formatNumber(first)} ${stated}`;
    return { ok: false, reason: `Qn ${formatNumber(qnStated)} ${stated} is outside the scope of the TNE table (${scope}; ${table.source})` };
  }
  const back = conversionFactor(stated, unit) as number;
  return { ok: true, value: found.value * back, unit, baseValue: found.value, baseUnit: stated, rule: found.rule };
}
