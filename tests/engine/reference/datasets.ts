/**
 * Seeded generator of test datasets for the reference comparisons. These are synthetic numbers
 * produced by a fixed-seed pseudo-random generator (SplitMix64 step, Steele, Lea & Flood 2014,
 * OOPSLA), not demo data and not measurements of any real product.
 */

export class SeededRandom {
  private state: bigint;
  constructor(seed: number) {
    this.state = BigInt(seed) & 0xffffffffffffffffn;
  }
  /** Uniform in [0, 1) with 53 random bits. */
  next(): number {
    this.state = (this.state + 0x9e3779b97f4a7c15n) & 0xffffffffffffffffn;
    let z = this.state;
    z = ((z ^ (z >> 30n)) * 0xbf58476d1ce4e5b9n) & 0xffffffffffffffffn;
    z = ((z ^ (z >> 27n)) * 0x94d049bb133111ebn) & 0xffffffffffffffffn;
    z = z ^ (z >> 31n);
    return Number(z >> 11n) / 2 ** 53;
  }
  /** Standard normal by the Box–Muller transform. */
  normal(): number {
    let u = this.next();
    while (u === 0) u = this.next();
    return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * this.next());
  }
  int(lo: number, hi: number): number {
    return lo + Math.floor(this.next() * (hi - lo + 1));
  }
}

export type Shape = 'normal' | 'uniform' | 'exponential' | 'lognormal' | 'heavy-tailed' | 'bimodal' | 'rounded' | 'drift';
export const SHAPES: readonly Shape[] = ['normal', 'uniform', 'exponential', 'lognormal', 'heavy-tailed', 'bimodal', 'rounded', 'drift'];

/** n values around `centre` with spread `spread`, of the given shape. */
export function generate(rng: SeededRandom, n: number, shape: Shape, centre = 500, spread = 4): number[] {
  const out: number[] = [];
  for (let i = 0; i < n; i++) {
    let z: number;
    switch (shape) {
      case 'normal':
        z = rng.normal();
        break;
      case 'uniform':
        z = (rng.next() - 0.5) * 3.4;
        break;
      case 'exponential':
        z = -Math.log(1 - rng.next()) - 1;
        break;
      case 'lognormal':
        z = Math.exp(0.6 * rng.normal()) - 1.2;
        break;
      case 'heavy-tailed': {
        // t with 3 degrees of freedom: normal / sqrt(chi-square(3)/3)
        const c = rng.normal() ** 2 + rng.normal() ** 2 + rng.normal() ** 2;
        z = rng.normal() / Math.sqrt(c / 3);
        break;
      }
      case 'bimodal':
        z = rng.normal() * 0.5 + (rng.next() < 0.5 ? -1.2 : 1.2);
        break;
      case 'rounded':
        z = Math.round(rng.normal() * 4) / 4; // checkweigher resolution: many ties
        break;
      case 'drift':
        z = rng.normal() + (3 * i) / Math.max(1, n - 1) - 1.5;
        break;
    }
    out.push(centre + spread * z);
  }
  return out;
}
