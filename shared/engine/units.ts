/**
 * Units of quantity and their exact factors to grams, millilitres or articles.
 *
 * - Metric: by definition (SI).
 * - US customary and avoirdupois, exact by the international yard and pound agreement of 1959 and
 *   NIST SP 811: 1 lb = 453.592 37 g; 1 oz (avoirdupois) = 28.349 523 125 g;
 *   1 US fl oz = 29.573 529 562 5 mL; 1 US gal = 3.785 411 784 L (= 128 US fl oz).
 * - Imperial (Canadian) volume: 1 imperial fl oz = 28.413 062 5 mL; 1 imperial gallon = 4.546 09 L
 *   (= 160 imperial fl oz) — UK Weights and Measures Act 1985 Schedule 1; Canada's Weights and
 *   Measures Act Schedule II gives the same.
 * - count: articles in a pack (a dimension of its own, never converted to mass or volume).
 *
 * 'fl oz' is the US fluid ounce (the name it had before imperial units were added).
 */
import type { Unit } from './types';

export type Dimension = 'mass' | 'volume' | 'count';

interface UnitDef {
  dimension: Dimension;
  /** Grams (mass), millilitres (volume) or articles (count) in one unit. */
  factor: number;
  /** Where the factor comes from. */
  source: string;
}

const SI = 'SI, by definition';
const YP = 'exact: international yard and pound agreement of 1959; NIST SP 811';
const IMP = 'exact: UK Weights and Measures Act 1985 Sch. 1; Canada Weights and Measures Act Sch. II';

const UNITS: Readonly<Record<Unit, UnitDef>> = {
  mg: { dimension: 'mass', factor: 0.001, source: SI },
  g: { dimension: 'mass', factor: 1, source: SI },
  kg: { dimension: 'mass', factor: 1000, source: SI },
  oz: { dimension: 'mass', factor: 28.349523125, source: YP },
  lb: { dimension: 'mass', factor: 453.59237, source: YP },
  mL: { dimension: 'volume', factor: 1, source: SI },
  cL: { dimension: 'volume', factor: 10, source: SI },
  L: { dimension: 'volume', factor: 1000, source: SI },
  'fl oz': { dimension: 'volume', factor: 29.5735295625, source: YP },
  'US gal': { dimension: 'volume', factor: 3785.411784, source: YP },
  'imp fl oz': { dimension: 'volume', factor: 28.4130625, source: IMP },
  'imp gal': { dimension: 'volume', factor: 4546.09, source: IMP },
  count: { dimension: 'count', factor: 1, source: 'articles counted' },
};

export const UNIT_NAMES: readonly Unit[] = Object.keys(UNITS) as Unit[];

/** Metric units of mass and volume (what the EU, UK, Australian, New Zealand and Chinese rules declare in). */
export const METRIC_UNITS: readonly Unit[] = ['mg', 'g', 'kg', 'mL', 'cL', 'L'];

export function isUnit(u: unknown): u is Unit {
  return typeof u === 'string' && Object.prototype.hasOwnProperty.call(UNITS, u);
}

export function dimensionOf(u: Unit): Dimension {
  return UNITS[u].dimension;
}

/** Grams, millilitres or articles in one `u`. */
export function baseFactor(u: Unit): number {
  return UNITS[u].factor;
}

/** Where the factor of `u` comes from. */
export function unitSource(u: Unit): string {
  return UNITS[u].source;
}

/** The base unit of a dimension: g for mass, mL for volume, count for articles. */
export function baseUnitOf(u: Unit): 'g' | 'mL' | 'count' {
  const d = UNITS[u].dimension;
  return d === 'mass' ? 'g' : d === 'volume' ? 'mL' : 'count';
}

/**
 * The affine map value_in_to = value_in_from × factor, across mass and volume through the density
 * (g/mL at 20 °C): net volume = net mass / density. Returns null when the dimensions differ and no
 * density can bridge them (no density given, or a count on either side).
 */
export function conversionFactor(from: Unit, to: Unit, density?: number): number | null {
  const a = UNITS[from];
  const b = UNITS[to];
  if (from === to) return 1;
  if (a.dimension === b.dimension) return a.factor / b.factor;
  if (a.dimension === 'count' || b.dimension === 'count') return null;
  if (density === undefined || !(density > 0)) return null;
  // mass → volume: mL = g / density; volume → mass: g = mL × density
  const perBase = a.dimension === 'mass' ? 1 / density : density;
  return (a.factor * perBase) / b.factor;
}

/**
 * Of two declarations of one pack's quantity (a dual declaration, e.g. "1 lb (454 g)"), the one
 * that states more, expressed in `unit`: the quantity a dual-declared pack is judged against
 * (NIST Handbook 133, Chapter 2: "check the larger of the SI and US customary quantities").
 * Null when the two are not of one dimension.
 */
export function largerDeclaration(a: { quantity: number; unit: Unit }, b: { quantity: number; unit: Unit }, unit: Unit): number | null {
  const fa = conversionFactor(a.unit, unit);
  const fb = conversionFactor(b.unit, unit);
  if (fa === null || fb === null) return null;
  return Math.max(a.quantity * fa, b.quantity * fb);
}
