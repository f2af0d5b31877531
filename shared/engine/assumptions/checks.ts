/**
 * The assumption checks reported beside the mean test, always in the same order: normality
 * (Shapiro–Wilk), independence in production order (runs about the median, lag-1
 * autocorrelation), one outlier (Grubbs, flagged and never dropped), and the distribution-free
 * companion (Wilcoxon signed-rank) when n < 30 and normality is doubtful. A check warns at
 * p < 0.05 (common practice).
 */
import type { Alternative, AssumptionCheck, DescriptiveStatistics } from '../types';
import { shapiroWilk } from './shapiroWilk';
import { runsTestAbout } from './runsTest';
import { lag1Test } from './lag1Test';
import { grubbs } from './grubbs';
import { wilcoxonSignedRank } from '../inference/wilcoxonSignedRank';
import { formatNumber, formatPValue, formatQuantity } from '../format';

export const WARNING_LEVEL = 0.05;

function notRun(id: AssumptionCheck['id'], title: string, why: string): AssumptionCheck {
  return { id, title, ran: false, statistic: null, pValue: null, finding: `not run: ${why}`, warning: false, details: {} };
}

export function assumptionChecks(
  x: ArrayLike<number>,
  d: DescriptiveStatistics,
  test: { hypothesisedMean: number; alternative: Alternative },
  extremes?: { minIndex: number; maxIndex: number },
): AssumptionCheck[] {
  const out: AssumptionCheck[] = [];
  const n = x.length;
  const p = formatPValue;

  // Shapiro–Wilk
  let normalityDoubtful = false;
  const swTitle = 'Shapiro–Wilk test of normality';
  if (n > 5000) {
    out.push(
      notRun(
        'shapiro-wilk',
        swTitle,
        `n = ${n} is above 5000, where Royston’s p-value approximation is not valid; with n ≥ 30 the t criterion relies on the mean being close to normal (common practice)`,
      ),
    );
  } else {
    const sw = shapiroWilk(x);
    if (sw.value === null) out.push(notRun('shapiro-wilk', swTitle, sw.reason));
    else {
      const warn = sw.value.pValue < WARNING_LEVEL;
      normalityDoubtful = warn;
      const consequence =
        n >= 30
          ? 'with n ≥ 30 the t criterion is still usable (common practice)'
          : 'with n < 30 the t criterion depends on it; see the Wilcoxon signed-rank test';
      out.push({
        id: 'shapiro-wilk',
        title: swTitle,
        ran: true,
        statistic: sw.value.statistic,
        pValue: sw.value.pValue,
        finding: warn
          ? `W = ${formatNumber(sw.value.statistic, 5)}, p = ${p(sw.value.pValue)}: the net quantities do not look normal; ${consequence}`
          : `W = ${formatNumber(sw.value.statistic, 5)}, p = ${p(sw.value.pValue)}: no evidence against normality`,
        warning: warn,
        details: { method: 'Royston (1995) AS R94' },
      });
    }
  }

  // Runs about the median
  const runsTitle = 'runs test about the median (production order)';
  const runs = runsTestAbout(x, d.median);
  if (runs.value === null) out.push(notRun('runs-about-median', runsTitle, runs.reason));
  else {
    const r = runs.value;
    const warn = r.pValue < WARNING_LEVEL;
    const pattern = r.runs < r.expectedRuns ? 'fewer runs than expected (drift or clustering)' : 'more runs than expected (alternation)';
    out.push({
      id: 'runs-about-median',
      title: runsTitle,
      ran: true,
      statistic: r.statistic,
      pValue: r.pValue,
      finding: warn
        ? `${r.runs} runs against ${formatNumber(r.expectedRuns, 4)} expected, p = ${p(r.pValue)}: ${pattern}; packs may not be independent`
        : `${r.runs} runs against ${formatNumber(r.expectedRuns, 4)} expected, p = ${p(r.pValue)}: no evidence against random order`,
      warning: warn,
      details: { runs: r.runs, above: r.above, below: r.below, expectedRuns: r.expectedRuns, method: r.method },
    });
  }

  // Lag-1 autocorrelation
  const acTitle = 'lag-1 autocorrelation (production order)';
  if (d.lag1Autocorrelation === null) out.push(notRun('lag1-autocorrelation', acTitle, 'zero spread'));
  else {
    const t = lag1Test(d.lag1Autocorrelation, n);
    const warn = t.pValue < WARNING_LEVEL;
    out.push({
      id: 'lag1-autocorrelation',
      title: acTitle,
      ran: true,
      statistic: d.lag1Autocorrelation,
      pValue: t.pValue,
      finding: warn
        ? `r₁ = ${formatNumber(d.lag1Autocorrelation, 4)}, p = ${p(t.pValue)}: consecutive packs are correlated; the t criterion's spread may be misjudged`
        : `r₁ = ${formatNumber(d.lag1Autocorrelation, 4)}, p = ${p(t.pValue)}: no evidence of correlation between consecutive packs`,
      warning: warn,
      details: { z: t.statistic },
    });
  }

  // Grubbs
  const gTitle = 'Grubbs test for one outlier';
  const g = grubbs(x, d.mean, d.standardDeviation ?? 0, { min: d.min, max: d.max, ...extremes });
  if (g.value === null) out.push(notRun('grubbs', gTitle, g.reason));
  else {
    const v = g.value;
    const warn = v.pValue < WARNING_LEVEL;
    out.push({
      id: 'grubbs',
      title: gTitle,
      ran: true,
      statistic: v.statistic,
      pValue: v.pValue,
      finding: warn
        ? `pack ${v.index} (${formatQuantity(v.value, d.unit)}) is a likely outlier, G = ${formatNumber(v.statistic, 4)}, p = ${p(v.pValue)}; it is flagged and kept in every criterion`
        : `most extreme pack ${v.index} (${formatQuantity(v.value, d.unit)}), G = ${formatNumber(v.statistic, 4)}, p = ${p(v.pValue)}: no outlier flagged`,
      warning: warn,
      details: { index: v.index, value: v.value },
    });
  }

  // Wilcoxon companion
  const wTitle = 'Wilcoxon signed-rank test (distribution-free companion of the t test)';
  if (n >= 30) out.push(notRun('wilcoxon-signed-rank', wTitle, 'n ≥ 30'));
  else if (!normalityDoubtful) out.push(notRun('wilcoxon-signed-rank', wTitle, 'the Shapiro–Wilk test does not doubt normality'));
  else {
    const w = wilcoxonSignedRank(x, test);
    if (w.value === null) out.push(notRun('wilcoxon-signed-rank', wTitle, w.reason));
    else {
      const v = w.value;
      out.push({
        id: 'wilcoxon-signed-rank',
        title: wTitle,
        ran: true,
        statistic: v.statistic,
        pValue: v.pValue,
        finding: `V = ${formatNumber(v.statistic)}, p = ${p(v.pValue)} (${v.method}) for H0: median = ${formatQuantity(test.hypothesisedMean, d.unit)}, read beside the t test`,
        warning: false,
        details: { method: v.method, nonZero: v.n, zeros: v.zeros, z: v.z },
      });
    }
  }
  return out;
}
