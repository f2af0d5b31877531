/**
 * Every number and date the console shows, written one way per page.
 *
 * Locale: one per page, taken once from the browser's preferred languages (`navigator.languages`),
 * so a German browser shows "3.000" and "496,8" everywhere and an English one "3,000" and "496.8".
 * Components read it with `useFormats()`; a test (or a page that must print for someone else)
 * provides another with `provide(FORMATS_KEY, createFormats('de-DE'))`.
 *
 * Precision (why: a figure should show what the measurement can resolve, no more):
 * - counts (packs, runs, degrees of freedom, sample sizes): integers, grouped by the locale;
 * - quantities of one verdict (net contents, mean, standard deviation, limits): one step for all,
 *   from `quantityDecimals`: the decimals of the scale's resolution when it is known; otherwise the
 *   largest power of ten not above a twentieth of the TNE (TNE 9 g → 0.1 g, TNE 15 mL → 0.1 mL,
 *   TNE 0.015 kg → 0.0001 kg), so rounding moves a figure by less than 2.5 % of the TNE; without
 *   a TNE (custom rules) the largest power of ten not above a thousandth of Qn (500 g → 0.1 g);
 * - declared figures (Qn, the TNE and the T1/T2 limits derived from them) are shown with their
 *   own digits (Qn 500 g, TNE 6.75 g: never 500.0 g or 6.8 g);
 * - test statistics (t, z, W, G, r₁, V): at most 3 decimals;
 * - p-values: plain notation, at most 3 significant digits and 4 decimals, and below 0.0001 only
 *   "< 0.0001" (never 6.27e−13: so small a probability says no more than "far below any α");
 * - other numbers (α, factors, expected counts): their own value, at most 4 significant digits.
 */
import { inject, type InjectionKey } from 'vue';

export interface QuantityContext {
  /** The step every quantity of the verdict is rounded to, as a count of decimals. */
  decimals: number;
  /** Figures the rulebook declares (Qn, TNE, T1, T2): shown with their own digits. */
  declared?: readonly number[];
}

export interface Formats {
  readonly locale: string;
  /** An integer count, grouped: 3,000 / 3.000. */
  count(n: number): string;
  /** A number with exactly `decimals` decimals. */
  fixed(x: number, decimals: number): string;
  /** A quantity's number at the verdict's step (or with its own digits for a declared figure). */
  amount(x: number, ctx: QuantityContext): string;
  /** The same with its unit: "496.8 g". */
  quantity(x: number, unit: string, ctx: QuantityContext): string;
  /** A p-value's number: "0.0457", or "< 0.0001" below the floor. */
  pValue(p: number): string;
  /** "p = 0.0457" or "p < 0.0001". */
  pEquals(p: number): string;
  /** A test statistic, at most 3 decimals. */
  statistic(x: number): string;
  /** Any other number with at most `significant` significant digits (4 by default). */
  plain(x: number, significant?: number): string;
  dateTime(iso: string | null | undefined): string;
}

/** Below this a p-value is shown as "< 0.0001". */
export const P_FLOOR = 0.0001;

/** The decimals a number needs to be written exactly (at most `cap`), ignoring binary float noise. */
export function ownDecimals(x: number, cap = 6): number {
  for (let d = 0; d < cap; d++) {
    const scaled = x * 10 ** d;
    if (Math.abs(scaled - Math.round(scaled)) <= 1e-9 * Math.max(1, Math.abs(scaled))) return d;
  }
  return cap;
}

/** Decimals of the largest power of ten not above `step` (0.45 → 1, 0.00075 → 4, 2 → 0). */
function decimalsOfStep(step: number): number {
  return Math.max(0, -Math.floor(Math.log10(step) + 1e-12));
}

/** The one rounding step of a verdict's quantities (see the rule at the top of this file). */
export function quantityDecimals(q: { resolution?: number | null; tne?: number | null; nominal: number }): number {
  if (q.resolution && q.resolution > 0) return ownDecimals(q.resolution);
  if (q.tne && q.tne > 0) return Math.min(6, decimalsOfStep(q.tne / 20));
  if (q.nominal > 0) return Math.min(6, decimalsOfStep(q.nominal / 1000));
  return 2;
}

/** The first of the browser's languages that the platform's Intl knows, else English. */
export function browserLocale(): string {
  const nav = typeof navigator === 'undefined' ? undefined : navigator;
  const wanted = nav ? (nav.languages?.length ? [...nav.languages] : nav.language ? [nav.language] : []) : [];
  try {
    return new Intl.NumberFormat(wanted).resolvedOptions().locale;
  } catch {
    return 'en';
  }
}

export function createFormats(locale: string = browserLocale()): Formats {
  let resolved: string;
  try {
    resolved = new Intl.NumberFormat(locale).resolvedOptions().locale;
  } catch {
    resolved = 'en';
  }
  const cache = new Map<string, Intl.NumberFormat>();
  const nf = (key: string, opts: Intl.NumberFormatOptions) => {
    let f = cache.get(key);
    if (!f) cache.set(key, (f = new Intl.NumberFormat(resolved, opts)));
    return f;
  };
  const fixed = (x: number, decimals: number) =>
    nf(`f${decimals}`, { minimumFractionDigits: decimals, maximumFractionDigits: decimals }).format(x === 0 ? 0 : x);
  const upTo = (x: number, decimals: number) => nf(`u${decimals}`, { maximumFractionDigits: decimals }).format(x);
  const dateTime = new Intl.DateTimeFormat(resolved, { dateStyle: 'medium', timeStyle: 'short' });

  const pValue = (p: number) => {
    if (!(p >= P_FLOOR)) return `< ${fixed(P_FLOOR, 4)}`;
    // 3 significant digits, but never past the 4th decimal.
    const decimals = Math.min(4, Math.max(0, 2 - Math.floor(Math.log10(p))));
    return upTo(Number(p.toFixed(decimals)), decimals);
  };

  const amount = (x: number, ctx: QuantityContext) =>
    ctx.declared?.some((d) => Math.abs(d - x) <= 1e-9 * Math.max(1, Math.abs(d))) ? upTo(x, ownDecimals(x)) : fixed(x, ctx.decimals);

  return {
    locale: resolved,
    count: (n) => nf('count', { maximumFractionDigits: 0 }).format(n),
    fixed,
    amount,
    quantity: (x, unit, ctx) => `${amount(x, ctx)} ${unit}`,
    pValue,
    pEquals: (p) => (p >= P_FLOOR ? `p = ${pValue(p)}` : `p ${pValue(p)}`),
    statistic: (x) => upTo(x, 3),
    plain: (x, significant = 4) => nf(`s${significant}`, { maximumSignificantDigits: significant }).format(x),
    dateTime(iso) {
      if (!iso) return '—';
      const d = new Date(iso);
      return Number.isNaN(d.getTime()) ? iso : dateTime.format(d);
    },
  };
}

/** The page's formats: one locale for the whole page, chosen once. */
export const pageFormats: Formats = createFormats();

export const FORMATS_KEY: InjectionKey<Formats> = Symbol('lotproof-formats');

/** The formats of the page (or the ones a parent provided); call in a component's setup. */
export function useFormats(): Formats {
  return inject(FORMATS_KEY, pageFormats);
}

// The engine's sealed sentences write numbers its own way (a point for decimals, six significant
// digits, "6.27e−13"). The record keeps them so; the page rewrites each number in its own locale
// and precision, by the grammar of shared/engine/format.ts. Clause numbers ("Annex II 2.2.1",
// "para 3.3–3.5", "2006/659") are left as written.
const UNIT = '(?:fl oz|mL|cL|kg|mg|oz|lb|g|L)';
const NUMBER = '[\u2212-]?\\d+(?:\\.\\d+)?(?:e[+\u2212-]?\\d+)?';
const TOKEN = new RegExp(
  `(?<![\\w./\u2013§])(?:(p|α|n|μ₀|[A-Za-zν]|r₁) = )?(${NUMBER})(?![\\w/\u2013]|\\.\\d)(?=( ${UNIT}(?![\\w]))?)`,
  'gu',
);
const CLAUSE_BEFORE = /(?:para|Annex [IVX]+|Sch\.|clause|nº|§|Article|Art\.)\s*$/u;

/** An engine sentence with every number written the page's way (see above). */
export function localiseEngineText(text: string, fmt: Formats, q: QuantityContext & { unit: string }): string {
  return text.replace(TOKEN, (match, symbol: string | undefined, num: string, unitPart: string | undefined, offset: number) => {
    if (!symbol && CLAUSE_BEFORE.test(text.slice(Math.max(0, offset - 16), offset))) return match;
    const x = Number(num.replace('\u2212', '-').replace(/e\u2212/, 'e-'));
    if (!Number.isFinite(x)) return match;
    if (symbol === 'p') return fmt.pEquals(x);
    const head = symbol ? `${symbol} = ` : '';
    const isInteger = !/[.e]/.test(num);
    if (unitPart && (!symbol || symbol === 'μ₀')) {
      const unit = unitPart.trim();
      // A quantity in another unit than the verdict's (a tare in g for a product in kg) keeps its own digits.
      return `${head}${unit === q.unit ? fmt.amount(x, q) : fmt.plain(x, 6)}`;
    }
    if (symbol === 'μ₀') return `${head}${fmt.amount(x, q)}`;
    if (symbol === 'α') return `${head}${fmt.plain(x)}`;
    if (symbol === 'n' || (isInteger && !symbol)) return `${head}${fmt.count(x)}`;
    if (symbol) return `${head}${fmt.statistic(x)}`;
    return fmt.plain(x);
  });
}

// The names the views have used so far, now in the page's locale and rules.
export function formatDateTime(iso: string | null | undefined): string {
  return pageFormats.dateTime(iso);
}
export function formatCount(n: number): string {
  return pageFormats.count(n);
}
/** A declared figure (a product's Qn, a tare) with its own digits, in the page's locale. */
export function formatNumber(x: number, significant = 6): string {
  return pageFormats.plain(x, significant);
}
export function formatPValue(p: number): string {
  return pageFormats.pValue(p);
}

/** A long hex seal shortened for tables: first 10 and last 6 characters. */
export function shortSeal(seal: string | null | undefined): string {
  if (!seal) return '—';
  return seal.length > 20 ? `${seal.slice(0, 10)}…${seal.slice(-6)}` : seal;
}

/** The rounding context of one verdict's quantities (`resolution`: the scale's step, when known). */
export function verdictQuantities(
  net: { unit: string; nominalQuantity: number; tolerableNegativeError: number | null; t1Limit: number | null; t2Limit: number | null },
  resolution?: number | null,
): QuantityContext & { unit: string } {
  const declared = [net.nominalQuantity, net.tolerableNegativeError, net.t1Limit, net.t2Limit].filter((v): v is number => v !== null);
  return { unit: net.unit, decimals: quantityDecimals({ resolution, tne: net.tolerableNegativeError, nominal: net.nominalQuantity }), declared };
}
