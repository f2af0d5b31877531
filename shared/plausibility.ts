// Plausibility before sealing: a pack whose net quantity is far outside what the product can hold
// is almost always a slip (a missing decimal point, grams keyed as milligrams), and a sealed verdict
// cannot be taken back, so such a lot is refused unless the submitter confirms it. The band is a
// fraction of the nominal quantity, in the product's unit, on the net quantity (the tare taken off,
// the unit converted, as the engine does it). Pure and shared: the server checks a lot with it (on
// the aside thread for a big lot, server/verdicts/aside-tasks.ts), the console's preview with the
// same code before anything is sent.
import type { LotInput } from './engine';
import { toNet, validateInput } from './engine/net';

export interface PlausibilityBand {
  minFraction: number;
  maxFraction: number;
}

/**
 * The band when a product sets none: 0.5 to 2 × the nominal quantity. Common practice, not law: the
 * tolerable negative errors are at most 9 % of Qn (engine/rulebooks/tne.ts), so a pack outside this
 * band is no filling error but a wrong number (a missing decimal point, grams keyed as kilograms).
 */
export const DEFAULT_PLAUSIBILITY: Readonly<PlausibilityBand> = { minFraction: 0.5, maxFraction: 2 };

/** Packs named in a refusal and in the record, at most (the count says how many there were). */
export const MAX_PACKS_NAMED = 100;

/** What the record says of the check: the band, in fractions and in the product's unit, and what was outside it. */
export interface PlausibilityRecord {
  minFraction: number;
  maxFraction: number;
  lower: number;
  upper: number;
  unit: string;
  /** Indexes into this sample's measurements, at most MAX_PACKS_NAMED. */
  implausiblePacks: number[];
  implausibleCount: number;
  /** The submitter confirmed the packs outside the band (confirmImplausible). */
  confirmed: boolean;
}

/**
 * Checks this sample's packs against the band. Returns null when the engine would refuse the input
 * anyway (it names the bad value itself). Values are plain arrays here (judgeLot converts first).
 */
export function checkPlausibility(input: LotInput, band: PlausibilityBand, confirmed: boolean): PlausibilityRecord | null {
  if (validateInput(input) !== null) return null;
  const net = toNet(input);
  if (!net.ok) return null;
  const qn = input.product.nominalQuantity;
  const lower = qn * band.minFraction;
  const upper = qn * band.maxFraction;
  const { net: values, previousCount } = net.data;
  const packs: number[] = [];
  let count = 0;
  for (let i = previousCount; i < values.length; i++) {
    const v = values[i]!;
    if (v < lower || v > upper) {
      if (packs.length < MAX_PACKS_NAMED) packs.push(i - previousCount);
      count++;
    }
  }
  return { minFraction: band.minFraction, maxFraction: band.maxFraction, lower, upper, unit: input.product.unit, implausiblePacks: packs, implausibleCount: count, confirmed };
}

/** The net quantities (product's unit) of some of this sample's packs, for a refusal's message. */
export function netValuesOf(input: LotInput, packs: number[]): number[] {
  const net = toNet(input);
  if (!net.ok) return [];
  return packs.map((i) => net.data.net[net.data.previousCount + i]!);
}
