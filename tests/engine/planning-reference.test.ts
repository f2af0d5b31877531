/**
 * Planning distributions against R (Debian r-base-core, stats package): power and sample size of
 * the one-sample t test vs `power.t.test(type = "one.sample")`; the mean-check probability vs the
 * noncentral `pt`; the T1 count probabilities vs `pbinom`/`dbinom` and `phyper`/`dhyper`.
 */
import { describe, expect, it } from 'vitest';
import { runRScript, rValues, rNum } from '../planning/r';
import { oneSampleTPower, oneSampleTSampleSize } from '../../shared/planning/sample-size';
import { exactParts, meanCheckProbability, resolvePlan, t1AcceptBinomial, t1AcceptHypergeometric } from '../../shared/planning/operating-characteristic';

describe('power and sample size vs R power.t.test(type = "one.sample")', () => {
  const cases: { n: number; delta: number; sd: number; alpha: number; alternative: 'one-sided' | 'two-sided'; strict: boolean }[] = [];
  for (const n of [3, 12.5, 20, 50, 200]) {
    for (const [delta, sd] of [[1, 2], [0.3, 1], [5, 4]] as const) {
      for (const alpha of [0.05, 0.005]) {
        cases.push({ n, delta, sd, alpha, alternative: 'one-sided', strict: false });
        cases.push({ n, delta, sd, alpha, alternative: 'two-sided', strict: false });
        cases.push({ n, delta, sd, alpha, alternative: 'two-sided', strict: true });
      }
    }
  }
  const rAlt = (a: string) => (a === 'one-sided' ? 'one.sided' : 'two.sided');
  const r = runRScript(
    cases
      .map((c, i) => `out("p${i}", power.t.test(n = ${rNum(c.n)}, delta = ${rNum(c.delta)}, sd = ${rNum(c.sd)}, sig.level = ${rNum(c.alpha)}, type = "one.sample", alternative = "${rAlt(c.alternative)}", strict = ${c.strict ? 'TRUE' : 'FALSE'})$power)`)
      .join('\n') +
      '\n' +
      cases
        .filter((c) => c.n === 20)
        .flatMap((c, i) =>
          [0.8, 0.9, 0.95].map(
            (pw) =>
              `out("n${i}_${pw}", power.t.test(delta = ${rNum(c.delta)}, sd = ${rNum(c.sd)}, sig.level = ${rNum(c.alpha)}, power = ${pw}, type = "one.sample", alternative = "${rAlt(c.alternative)}", strict = ${c.strict ? 'TRUE' : 'FALSE'}, tol = 1e-12)$n)`,
          ),
        )
        .join('\n'),
  );

  it('power agrees to 1e-6 for one- and two-sided tests (strict and not)', () => {
    cases.forEach((c, i) => {
      const ours = oneSampleTPower(c);
      expect(Math.abs(ours - rValues(r, `p${i}`)[0]!), JSON.stringify(c)).toBeLessThan(1e-6);
    });
  });

  it('sample size agrees to 1e-6 (R uniroot with tol = 1e-12) and its ceiling reaches the power', () => {
    let checked = 0;
    cases
      .filter((c) => c.n === 20)
      .forEach((c, i) => {
        for (const power of [0.8, 0.9, 0.95]) {
          const rn = rValues(r, `n${i}_${power}`)[0]!;
          const ours = oneSampleTSampleSize({ ...c, power });
          expect(Math.abs(ours.n - rn), JSON.stringify({ ...c, power })).toBeLessThan(1e-6);
          expect(ours.packs).toBe(Math.ceil(rn));
          expect(ours.power).toBeGreaterThanOrEqual(power);
          checked++;
        }
      });
    expect(checked).toBe(54);
  });

  it('names the bad field', () => {
    expect(() => oneSampleTPower({ n: 10, delta: 1, sd: 0, alpha: 0.05, alternative: 'one-sided' })).toThrow(expect.objectContaining({ field: 'sd' }));
    expect(() => oneSampleTSampleSize({ delta: 1, sd: 1, alpha: 0.05, power: 1, alternative: 'one-sided' })).toThrow(expect.objectContaining({ field: 'power' }));
    expect(() => oneSampleTSampleSize({ delta: 1, sd: 1, alpha: 0, power: 0.9, alternative: 'one-sided' })).toThrow(expect.objectContaining({ field: 'alpha' }));
  });
});

describe('mean check alone vs R noncentral pt', () => {
  // λ as printed in Directive 76/211/EEC Annex II 2.3.3: 0.640 (n 20), 0.503 (n 30), 0.379 (n 50); others t(0.995; n − 1)/√n.
  const grid: { n: number; lambda: string; mean: number; sd: number }[] = [];
  for (const [n, lambda] of [[20, '0.64'], [30, '0.503'], [50, '0.379'], [80, 'qt(0.995, 79)/sqrt(80)'], [160, 'qt(0.995, 159)/sqrt(160)']] as const) {
    for (const [mean, sd] of [[500, 4], [499, 4], [497.5, 6], [503, 2], [495, 10], [470, 3]] as const) grid.push({ n, lambda, mean, sd });
  }
  const r = runRScript(
    grid.map((g, i) => `lam <- ${g.lambda}; out("m${i}", lam, pt(-lam * sqrt(${g.n}), ${g.n - 1}, sqrt(${g.n}) * (${g.mean} - 500) / ${g.sd}, lower.tail = FALSE))`).join('\n') +
      '\nout("full", pnorm(sqrt(60) * (499.5 - 500) / 3))',
  );
  it('P(x̄ ≥ Qn − λ·s) = pt(−λ√n, n − 1, √n(μ − Qn)/σ, lower.tail = FALSE) to 1e-9', () => {
    grid.forEach((g, i) => {
      const [lam, p] = rValues(r, `m${i}`) as [number, number];
      expect(Math.abs(meanCheckProbability(g.n, lam, g.mean, g.sd, 500) - p), JSON.stringify(g)).toBeLessThan(1e-9);
    });
  });
  it('the exact parts use the plan the engine uses (lot 1000: n 50, λ 0.379; lot 60 in full: pnorm)', () => {
    const i = grid.findIndex((g) => g.n === 50 && g.mean === 499);
    const parts = exactParts({ rulebook: 'eu-76-211', nominalQuantity: 500, unit: 'g', lotSize: 1000, testing: 'non-destructive', mean: 499, sd: 4 });
    expect(Math.abs(parts.meanFirstSample - rValues(r, `m${i}`)[1]!)).toBeLessThan(1e-9);
    const full = exactParts({ rulebook: 'eu-76-211', nominalQuantity: 500, unit: 'g', lotSize: 60, testing: 'non-destructive', mean: 499.5, sd: 3 });
    expect(Math.abs(full.meanFirstSample - rValues(r, 'full')[0]!)).toBeLessThan(1e-12);
  });
});

describe('T1 counts vs R pbinom / phyper', () => {
  // Plans of Directive 76/211/EEC Annex II 2.2.1 (double, by lot size) and 2.2.2 (destructive, 20: accept 1).
  const ps = [0.001, 0.02, 0.05, 0.1, 0.2];
  const r = runRScript(
    [
      `dbl <- function(p, n1, a1, r1, n2, a2) pbinom(a1, n1, p) + sum(sapply((a1 + 1):(r1 - 1), function(x) dbinom(x, n1, p) * pbinom(a2 - x, n2, p)))`,
      `hdbl <- function(N, D, n1, a1, r1, n2, a2) phyper(a1, D, N - D, n1) + sum(sapply((a1 + 1):(r1 - 1), function(x) if (x > D) 0 else dhyper(x, D, N - D, n1) * phyper(a2 - x, D - x, N - n1 - (D - x), n2)))`,
      ...ps.map((p, i) => `out("b${i}", pbinom(1, 20, ${p}), dbl(${p}, 30, 1, 3, 30, 4), dbl(${p}, 50, 2, 5, 50, 6), dbl(${p}, 80, 3, 7, 80, 8))`),
      ...[0, 3, 10, 25, 60].map((D) => `out("h${D}", phyper(1, ${D}, 400 - ${D}, 20), hdbl(400, ${D}, 30, 1, 3, 30, 4), hdbl(2000, ${D * 5}, 50, 2, 5, 50, 6))`),
    ].join('\n'),
  );
  const plan = (lotSize: number, testing: 'destructive' | 'non-destructive') => resolvePlan({ lotSize, testing });
  it('binomial: destructive single plan and the three double plans, both stages', () => {
    ps.forEach((p, i) => {
      const [dest, d30, d50, d80] = rValues(r, `b${i}`) as [number, number, number, number];
      expect(Math.abs(t1AcceptBinomial(plan(1000, 'destructive'), p) - dest)).toBeLessThan(1e-12);
      expect(Math.abs(t1AcceptBinomial(plan(400, 'non-destructive'), p) - d30)).toBeLessThan(1e-12);
      expect(Math.abs(t1AcceptBinomial(plan(2000, 'non-destructive'), p) - d50)).toBeLessThan(1e-12);
      expect(Math.abs(t1AcceptBinomial(plan(5000, 'non-destructive'), p) - d80)).toBeLessThan(1e-12);
    });
  });
  it('hypergeometric: a finite lot holding D packs below T1 (to 1e-10: sums of exp(log-binomials))', () => {
    for (const D of [0, 3, 10, 25, 60]) {
      const [dest, d30, d50] = rValues(r, `h${D}`) as [number, number, number];
      expect(Math.abs(t1AcceptHypergeometric(plan(400, 'destructive'), 400, D) - dest)).toBeLessThan(1e-10);
      expect(Math.abs(t1AcceptHypergeometric(plan(400, 'non-destructive'), 400, D) - d30)).toBeLessThan(1e-10);
      expect(Math.abs(t1AcceptHypergeometric(plan(2000, 'non-destructive'), 2000, D * 5) - d50)).toBeLessThan(1e-10);
    }
  });
});
