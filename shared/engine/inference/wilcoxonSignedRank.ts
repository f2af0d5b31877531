/**
 * Wilcoxon signed-rank test of a location μ₀ (Wilcoxon 1945, "Individual comparisons by ranking
 * methods", Biometrics Bulletin 1(6):80–83), the distribution-free companion of the one-sample t
 * test. Differences dᵢ = xᵢ − μ₀ equal to zero are dropped; |dᵢ| are ranked with mid-ranks for
 * ties; V = sum of the ranks of positive dᵢ.
 *
 * p-value: exact (from the null distribution of V) when fewer than 50 differences remain and there
 * are neither ties nor zeros; otherwise the normal approximation with the tie-corrected variance
 * n(n+1)(2n+1)/24 − Σ(tⱼ³ − tⱼ)/48 and a continuity correction of ½ — the same choices as R's
 * `wilcox.test` defaults, so that R can serve as the reference.
 */
import type { Alternative } from '../types';
import type { Maybe } from '../result';
import { none, some } from '../result';
import { signedRankCdf, signedRankUpperTail } from './signedRankDistribution';
import { standardNormalCdf } from '../distributions/normal';

export interface WilcoxonResult {
  statistic: number;
  pValue: number;
  /** Number of non-zero differences used. */
  n: number;
  zeros: number;
  ties: boolean;
  method: 'exact' | 'normal approximation with continuity correction';
  /** Standardised statistic of the normal approximation; null for the exact test. */
  z: number | null;
}

export interface WilcoxonOptions {
  hypothesisedMean: number;
  alternative: Alternative;
  /** Force the exact (true) or approximate (false) p-value; default exact when n < 50 with no ties or zeros. */
  exact?: boolean;
}

export function wilcoxonSignedRank(x: ArrayLike<number>, opts: WilcoxonOptions): Maybe<WilcoxonResult> {
  const mu = opts.hypothesisedMean;
  const d: number[] = [];
  let zeros = 0;
  for (let i = 0; i < x.length; i++) {
    const v = x[i]! - mu;
    if (v === 0) zeros++;
    else d.push(v);
  }
  const n = d.length;
  if (n === 0) return none('every measurement equals the hypothesised value, so no signed ranks remain');
  const order = d.map((_, i) => i).sort((i, j) => Math.abs(d[i]!) - Math.abs(d[j]!));
  const ranks = new Float64Array(n);
  let tieCorrection = 0;
  let ties = false;
  for (let i = 0; i < n; ) {
    let j = i;
    const ai = Math.abs(d[order[i]!]!);
    while (j + 1 < n && Math.abs(d[order[j + 1]!]!) === ai) j++;
    const mid = (i + j + 2) / 2;
    for (let k = i; k <= j; k++) ranks[order[k]!] = mid;
    const t = j - i + 1;
    if (t > 1) {
      ties = true;
      tieCorrection += t * t * t - t;
    }
    i = j + 1;
  }
  let v = 0;
  for (let i = 0; i < n; i++) if (d[i]! > 0) v += ranks[i]!;
  const exact = (opts.exact ?? n < 50) && !ties && zeros === 0;
  const alt = opts.alternative;
  if (exact) {
    let p: number;
    if (alt === 'less') p = signedRankCdf(v, n);
    else if (alt === 'greater') p = signedRankUpperTail(v, n);
    else {
      const half = v > (n * (n + 1)) / 4 ? signedRankUpperTail(v, n) : signedRankCdf(v, n);
      p = Math.min(1, 2 * half);
    }
    return some({ statistic: v, pValue: p, n, zeros, ties, method: 'exact', z: null });
  }
  const centred = v - (n * (n + 1)) / 4;
  const sigma = Math.sqrt((n * (n + 1) * (2 * n + 1)) / 24 - tieCorrection / 48);
  if (!(sigma > 0)) return none('the signed ranks have no spread');
  const correction = alt === 'two-sided' ? Math.sign(centred) * 0.5 : alt === 'greater' ? 0.5 : -0.5;
  const z = (centred - correction) / sigma;
  let p: number;
  if (alt === 'less') p = standardNormalCdf(z);
  else if (alt === 'greater') p = standardNormalCdf(-z);
  else p = Math.min(1, 2 * Math.min(standardNormalCdf(z), standardNormalCdf(-z)));
  return some({
    statistic: v,
    pValue: p,
    n,
    zeros,
    ties,
    method: 'normal approximation with continuity correction',
    z,
  });
}
