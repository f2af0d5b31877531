/**
 * Units of quantity and their exact factors to grams or millilitres: the international yard and
 * pound agreement of 1959 and NIST SP 811 (1 lb = 453.592 37 g; 1 oz avoirdupois = 28.349 523 125 g;
 * 1 US fl oz = 29.573 529 562 5 mL).
 */
import type { Unit } from './types';

export type Dimension = 'mass' | 'volume';

interface UnitDef {
  dimension: Dimension;
  /** Grams (mass) or millilitres (volume) in one unit. */
  factor: number;
}

const UNITS: Readonly<Record<Unit, UnitDef>> = {
  mg: { dimension: 'mass', factor: 0.001 },
  g: { dimension: 'mass', factor: 1 },
  kg: { dimension: 'mass', factor: 1000 },
  oz: { dimension: 'mass', factor: 28.349523125 },
  lb: { dimension: 'mass', factor: 453.59237 },
  mL: { dimension: 'volume', factor: 1 },
  cL: { dimension: 'volume', factor: 10 },
  L: { dimension: 'volume', factor: 1000 },
  'fl oz': { dimension: 'volume', factor: 29.5735295625 },
};

export const UNIT_NAMES: readonly Unit[] = Object.keys(UNITS) as Unit[];

export function isUnit(u: unknown): u is Unit {
  return typeof u === 'string' && Object.prototype.hasOwnProperty.call(UNITS, u);
}

export function dimensionOf(u: Unit): Dimension {
  return UNITS[u].dimension;
}

/** Grams or millilitres in one `u`. */
export function baseFactor(u: Unit): number {
  return UNITS[u].factor;
}

/** The base unit of a dimension: g for mass, mL for volume. */
export function baseUnitOf(u: Unit): 'g' | 'mL' {
  return UNITS[u].dimension === 'mass' ? 'g' : 'mL';
}

/**
 * The affine map value_in_to = value_in_from × factor, across dimensions through the density
 * (g/mL at 20 °C): net volume = net mass / density. Returns null when the dimensions differ and
 * no density is given.
 */
export function conversionFactor(from: Unit, to: Unit, density?: number): number | null {
  const a = UNITS[from];
  const b = UNITS[to];
  if (from === to) return 1;
  if (a.dimension === b.dimension) return a.factor / b.factor;
  if (density === undefined || !(density > 0)) return null;
  // mass → volume: mL = g / density; volume → mass: g = mL × density
  const perBase = a.dimension === 'mass' ? 1 / density : density;
  return (a.factor * perBase) / b.factor;
}
