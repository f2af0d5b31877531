/**
 * Student's t distribution (Student 1908, "The probable error of a mean", Biometrika 6:1–25).
 *
 * Backed by @stdlib/stats-base-dists-t-cdf and -t-quantile (regularised incomplete beta function
 * and its inverse, after Boost.Math). Why not jstat: measured on this machine, jstat's Student t
 * CDF and quantile agree with R (`pt`, `qt`) only to about 1e-8 relative, while the stdlib ones
 * agree to about 1e-14; the engine's tests require t-test p-values to 1e-10 relative against R.
 */
import cumulativeT from '@stdlib/stats-base-dists-t-cdf';
import tQuantile from '@stdlib/stats-base-dists-t-quantile';

/** P(T ≤ t) for T ~ t(df). */
export function studentTLowerTail(t: number, df: number): number {
  return cumulativeT(t, df);
}

/** P(T > t) for T ~ t(df), computed as P(T ≤ −t) by symmetry so that tiny upper tails keep their precision. */
export function studentTUpperTail(t: number, df: number): number {
  return cumulativeT(-t, df);
}

/** The p-quantile of t(df): the t with P(T ≤ t) = p. */
export function studentTQuantile(p: number, df: number): number {
  return tQuantile(p, df);
}
