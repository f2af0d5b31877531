/**
 * Standard normal distribution, backed by @stdlib/stats-base-dists-normal-cdf (erfc) and
 * -normal-quantile (erfinv), both accurate to about 1e-15 relative, which the Shapiro–Wilk and
 * Wilcoxon p-value tolerances against R (1e-6, 1e-10) need.
 */
import normalCdf from '@stdlib/stats-base-dists-normal-cdf';
import normalQuantile from '@stdlib/stats-base-dists-normal-quantile';

/** Φ(z) = P(Z ≤ z). */
export function standardNormalCdf(z: number): number {
  return normalCdf(z, 0, 1);
}

/** P(Z > z), computed as Φ(−z) so that tiny upper tails keep their precision. */
export function standardNormalUpperTail(z: number): number {
  return normalCdf(-z, 0, 1);
}

/** Φ⁻¹(p). */
export function standardNormalQuantile(p: number): number {
  return normalQuantile(p, 0, 1);
}
