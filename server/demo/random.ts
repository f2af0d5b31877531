// A small seeded generator for demo data, so every fresh start invents the same demo packer.
// SplitMix32-style integer hash stepping (public domain construction); not for cryptography.

export type Rng = () => number;

/** Uniform numbers in [0, 1) from a 32-bit seed. */
export function seededRng(seed: number): Rng {
  let s = seed >>> 0;
  return () => {
    s = (s + 0x9e3779b9) >>> 0;
    let z = s;
    z = Math.imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
    z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
    z = (z ^ (z >>> 16)) >>> 0;
    return z / 4294967296;
  };
}

/** A standard normal deviate by the Box–Muller transform (Box & Muller 1958, Ann. Math. Statist. 29). */
export function normal(rng: Rng): number {
  const u = 1 - rng();
  const v = rng();
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * v);
}

/** n pack contents around `mean` with spread `sd`, rounded to `decimals`. */
export function packContents(rng: Rng, n: number, mean: number, sd: number, decimals = 1): number[] {
  const f = 10 ** decimals;
  return Array.from({ length: n }, () => Math.max(0, Math.round((mean + sd * normal(rng)) * f) / f));
}
