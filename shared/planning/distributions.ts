/**
 * Distributions the planning module needs beyond the engine's own.
 *
 * - Noncentral t CDF. No maintained npm package has one we could rely on: the @stdlib collection
 *   has no noncentral t, and jstat's `noncentralt.cdf` sums its series from the first term rather
 *   than from the largest, so its weights underflow for a large noncentrality and its flip for a
 *   negative t loses the tail. So it is written here, from its
 *   definition as a normal variable shifted by the noncentrality over the root of an independent
 *   chi-square variable per degree of freedom: the probability is the expectation, over that root s,
 *   of the normal probability at t·s minus the noncentrality, integrated over log s by adaptive
 *   Gauss–Kronrod (7–15) quadrature (nodes and weights as tabulated in QUADPACK, Piessens et al. 1983).
 *   Checked against R's `noncentral pt` in tests/engine/planning-reference.test.ts.
 * - Binomial and hypergeometric probabilities, summed from log binomial coefficients (the plans'
 *   samples are at most a few hundred packs, so exact sums are cheap). Checked against R's
 *   `pbinom`/`phyper`.
 */
import normalCdfOf from '@stdlib/stats-base-dists-normal-cdf';
import tDistCdf from '@stdlib/stats-base-dists-t-cdf';
import tDistQuantile from '@stdlib/stats-base-dists-t-quantile';
import logGammaOf from '@stdlib/math-base-special-gammaln';
import regularisedIncompleteBeta from '@stdlib/math-base-special-betainc';

export const standardNormalCdf = (z: number): number => normalCdfOf(z, 0, 1);
export const studentTCdf = (t: number, df: number): number => tDistCdf(t, df);
export const studentTQuantile = (p: number, df: number): number => tDistQuantile(p, df);
export const logOfGamma = (x: number): number => logGammaOf(x);

// Gauss–Kronrod 7–15 nodes and weights (QUADPACK qk15).
const XGK = [0.991455371120812639206854697526329, 0.949107912342758524526189684047851, 0.864864423359769072789712788640926, 0.741531185599394439863864773280788, 0.586087235467691130294144845693013, 0.405845151377397166906606412076961, 0.207784955007898467600689403773245, 0];
const WGK = [0.022935322010529224963732008058970, 0.063092092629978553290700663189204, 0.104790010322250183839876322541518, 0.140653259715525918745189590510238, 0.169004726639267902826583426598550, 0.190350578064785409913256402421014, 0.204432940075298892414161999234649, 0.209482141084727828012999174891714];
const WG = [0.129484966168869693270611432679082, 0.279705391489276667901467771423780, 0.381830050505118944950369775488975, 0.417959183673469387755102040816327];

function kronrod(f: (x: number) => number, a: number, b: number): { value: number; error: number } {
  const c = (a + b) / 2;
  const h = (b - a) / 2;
  const fc = f(c);
  let k = fc * WGK[7]!;
  let g = fc * WG[3]!;
  for (let j = 0; j < 7; j++) {
    const dx = h * XGK[j]!;
    const s = f(c - dx) + f(c + dx);
    k += WGK[j]! * s;
    if (j % 2 === 1) g += WG[(j - 1) / 2]! * s;
  }
  return { value: k * h, error: Math.abs((k - g) * h) };
}

/**
 * Globally adaptive Gauss–Kronrod on [a, b] (the QUADPACK qag strategy): bisect the piece with the
 * largest error estimate until the summed estimate is below max(absTol, relTol·|integral|), or
 * `maxPieces` pieces. (A recursion that halves an absolute tolerance at every level can ask for
 * less than the rounding error of a piece and then never stops.)
 */
export function adaptiveIntegral(f: (x: number) => number, a: number, b: number, absTol = 1e-15, relTol = 1e-13, maxPieces = 2000): number {
  const pieces: { a: number; b: number; value: number; error: number }[] = [{ a, b, ...kronrod(f, a, b) }];
  for (;;) {
    let value = 0;
    let error = 0;
    let worst = 0;
    for (let i = 0; i < pieces.length; i++) {
      value += pieces[i]!.value;
      error += pieces[i]!.error;
      if (pieces[i]!.error > pieces[worst]!.error) worst = i;
    }
    if (error <= Math.max(absTol, relTol * Math.abs(value)) || pieces.length >= maxPieces) return value;
    const p = pieces[worst]!;
    const m = (p.a + p.b) / 2;
    if (!(m > p.a && m < p.b)) return value; // no room left to split
    pieces.splice(worst, 1, { a: p.a, b: m, ...kronrod(f, p.a, m) }, { a: m, b: p.b, ...kronrod(f, m, p.b) });
  }
}

/** log density of x = log √(W/ν) for W ~ χ²(ν). */
function logDensityLogS(x: number, df: number, logNorm: number): number {
  // s = e^x, w = ν s²; f_x(x) = f_W(ν s²) · 2ν s² (dw/dx = 2ν s²)
  const w = df * Math.exp(2 * x);
  return (df / 2 - 1) * Math.log(w) - w / 2 + logNorm + Math.log(2 * w);
}

/** P(T ≤ t) for T noncentral t with df degrees of freedom and the given noncentrality (R's noncentral pt). */
export function noncentralTLower(t: number, df: number, noncentrality: number): number {
  if (!(df > 0) || !Number.isFinite(t) || !Number.isFinite(noncentrality)) {
    if (t === Number.POSITIVE_INFINITY) return 1;
    if (t === Number.NEGATIVE_INFINITY) return 0;
    return Number.NaN;
  }
  if (t === 0) return standardNormalCdf(-noncentrality);
  if (noncentrality === 0) return studentTCdf(t, df);
  const logNorm = -(df / 2) * Math.log(2) - logOfGamma(df / 2);
  // Mode of the log-s density: d/dx [ν x − ν e^{2x}/2] = 0 → x = 0 (exactly, for every ν).
  const top = logDensityLogS(0, df, logNorm);
  const cut = top - 46; // density below e^-46 ≈ 1e-20 of the peak contributes nothing we can see
  // The density's width is about 1/√(2ν): step by a fraction of it so large ν keeps its peak inside.
  const step = Math.min(0.5, 1 / Math.sqrt(df));
  let lo = -step;
  while (logDensityLogS(lo, df, logNorm) > cut) lo -= step;
  let hi = step;
  while (logDensityLogS(hi, df, logNorm) > cut) hi += step / 2;
  const f = (x: number) => standardNormalCdf(t * Math.exp(x) - noncentrality) * Math.exp(logDensityLogS(x, df, logNorm));
  // Split at the mode and where Φ's argument crosses zero, so each piece is smooth.
  const points = [lo, hi, 0];
  const cross = Math.log(noncentrality / t);
  if (noncentrality / t > 0 && cross > lo && cross < hi) points.push(cross);
  points.sort((a, b) => a - b);
  let sum = 0;
  for (let i = 0; i + 1 < points.length; i++) sum += adaptiveIntegral(f, points[i]!, points[i + 1]!);
  return Math.min(1, Math.max(0, sum));
}

/** P(T > t) for the same noncentral t, as P(−T < −t) with −T noncentral t(−noncentrality), keeping small upper tails. */
export function noncentralTUpper(t: number, df: number, noncentrality: number): number {
  return noncentralTLower(-t, df, -noncentrality);
}

function logChoose(n: number, k: number): number {
  return logOfGamma(n + 1) - logOfGamma(k + 1) - logOfGamma(n - k + 1);
}

/** P(X = k) for X ~ Binomial(n, p). */
export function binomialPmf(k: number, n: number, p: number): number {
  if (k < 0 || k > n || !Number.isInteger(k)) return 0;
  if (p <= 0) return k === 0 ? 1 : 0;
  if (p >= 1) return k === n ? 1 : 0;
  return Math.exp(logChoose(n, k) + k * Math.log(p) + (n - k) * Math.log1p(-p));
}

/** P(X ≤ k) for X ~ Binomial(n, p) (R: pbinom(k, n, p)). */
export function binomialCdf(k: number, n: number, p: number): number {
  if (k < 0) return 0;
  if (k >= n) return 1;
  // P(X ≤ k) = I_{1−p}(n − k, k + 1), the regularised incomplete beta (exact identity).
  return regularisedIncompleteBeta(1 - p, n - k, k + 1);
}

/** P(X = k) for X hypergeometric: k defectives in a sample of n from N holding D (R: dhyper(k, D, N − D, n)). */
export function hypergeometricPmf(k: number, N: number, D: number, n: number): number {
  if (k < Math.max(0, n - (N - D)) || k > Math.min(n, D)) return 0;
  return Math.exp(logChoose(D, k) + logChoose(N - D, n - k) - logChoose(N, n));
}

/** P(X ≤ k) for the same (R: phyper(k, D, N − D, n)). */
export function hypergeometricCdf(k: number, N: number, D: number, n: number): number {
  let s = 0;
  const top = Math.min(k, n, D);
  for (let j = Math.max(0, n - (N - D)); j <= top; j++) s += hypergeometricPmf(j, N, D, n);
  return Math.min(1, s);
}
