// Student's t density for drawing the test's reference distribution (not for deciding anything:
// the engine computes every p-value with @stdlib). jstat's density agrees with R's dt() to about
// 1e-9 relative, far finer than a chart can show, so the well-known package does this job.
import jstatModule from 'jstat';

const jStat = ((jstatModule as unknown as { jStat?: typeof jstatModule }).jStat ?? jstatModule) as unknown as {
  studentt: { pdf: (x: number, dof: number) => number };
  normal: { pdf: (x: number, mean: number, std: number) => number };
};

/** Density of t(ν) at t; ν = null means the standard normal (the z test). */
export function tDensity(t: number, df: number | null): number {
  if (df === null || df > 1e7) return jStat.normal.pdf(t, 0, 1);
  return jStat.studentt.pdf(t, df);
}

/** Which side(s) of the statistic the p-value area covers, for the alternative of the test. */
export function inTail(x: number, statistic: number, alternative: 'less' | 'greater' | 'two-sided'): boolean {
  if (alternative === 'less') return x <= statistic;
  if (alternative === 'greater') return x >= statistic;
  return Math.abs(x) >= Math.abs(statistic);
}
