import type { LotInput, ProductSpec, LotData, Verdict } from '../../shared/engine';
import { evaluateLot } from '../../shared/engine';

export function lotInput(product: Partial<ProductSpec>, lot: Partial<LotData>): LotInput {
  return {
    product: { nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211' }, ...product },
    lot: { lotSize: 400, testing: 'non-destructive', measurementUnit: 'g', measurements: [], ...lot },
  };
}

export function verdictOf(input: LotInput): Verdict {
  const r = evaluateLot(input);
  if (!r.ok) throw new Error(`${r.error.code} at ${r.error.pointer}: ${r.error.message}`);
  return r.verdict;
}

/** n values with mean `centre` and a small deterministic spread (a symmetric ramp; no randomness). */
export function ramp(n: number, centre: number, halfWidth: number): number[] {
  return Array.from({ length: n }, (_, i) => centre + (n === 1 ? 0 : halfWidth * (2 * i / (n - 1) - 1)));
}

/** A ramp of n packs around `centre` with `count` of them, every `stride`-th from the first, set to `value`. */
export function withPacksAt(n: number, centre: number, count: number, value: number, stride: number): number[] {
  const xs = ramp(n, centre, 1.5);
  for (let i = 0; i < count; i++) xs[i * stride] = value;
  return xs;
}

/** Interleaves a ramp so that production order is not monotone. */
export function shuffled(xs: number[]): number[] {
  const out: number[] = [];
  for (let i = 0; i < xs.length; i += 2) out.push(xs[i]!);
  for (let i = xs.length % 2 === 0 ? xs.length - 1 : xs.length - 2; i >= 1; i -= 2) out.push(xs[i]!);
  return out;
}
