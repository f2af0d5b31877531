// The verdict page's first sentence: a release decision built from the verdict's criteria and
// figures (console/src/lib/releaseDecision.ts). Every verdict here is the real engine's answer to
// an invented lot of a 500 g product under Directive 76/211/EEC; the figures each sentence must
// carry are recomputed in the test from the verdict's own fields with Number.prototype.toFixed
// (ECMA-262 §21.1.3.3), an implementation independent of the console's formatting module.
import { describe, expect, it } from 'vitest';
import { evaluateLot, type Verdict } from '../../shared/engine';
import { explainMeanTest, releaseDecisions } from '../../console/src/lib/releaseDecision';
import { createFormats, verdictQuantities } from '../../console/src/lib/format';

const en = createFormats('en-GB');
const de = createFormats('de-DE');
const wave = (centre: number, amplitude: number, n: number) => Array.from({ length: n }, (_, i) => centre + amplitude * Math.sin(i * 1.7));

function judge(measurements: number[], rulebook: { id: 'eu-76-211' } | { id: 'custom'; params?: Record<string, unknown> } = { id: 'eu-76-211' }): Verdict {
  const r = evaluateLot({
    product: { nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: rulebook as never },
    lot: { lotSize: 400, testing: 'non-destructive', measurementUnit: 'g', measurements },
  });
  if (!r.ok) throw new Error(r.error.message);
  return r.verdict;
}

const conforming = judge(wave(505, 3, 30));
const nonconforming = judge([...wave(496, 3, 27), 480, 481, 479]);
const undecided = judge([...wave(505, 3, 28), 483, 484]);
const tooFew = judge(wave(505, 3, 10));
const lot = { lotCode: 'L-0412' };
const criterion = (v: Verdict, id: string) => v.criteria.find((c) => c.id === id)!;

describe('releaseDecisions', () => {
  it('releases a conforming lot, naming the rulebook it meets', () => {
    expect(conforming.decision).toBe('conforming');
    const [d] = releaseDecisions([conforming], lot, en);
    expect(d).toMatchObject({ action: 'release', market: conforming.rulebook.title });
    expect(d!.sentence).toBe(`Release: the lot meets every criterion of ${conforming.rulebook.title}.`);
  });

  it('holds a nonconforming lot and says by how much the mean misses its limit and how many packs are short', () => {
    expect(nonconforming.decision).toBe('nonconforming');
    const mean = criterion(nonconforming, 'mean');
    const t1 = criterion(nonconforming, 't1');
    // The step of a 500 g product's quantities: TNE 15 g (from the verdict) / 20 = 0.75 → 0.1 g, one decimal.
    expect(nonconforming.net.tolerableNegativeError).toBe(15);
    const short = (mean.limit - mean.observed).toFixed(1);
    const limit = mean.limit.toFixed(1);
    const [d] = releaseDecisions([nonconforming], lot, en);
    expect(d!.action).toBe('hold');
    expect(d!.sentence).toBe(
      `Hold: the mean is ${short} g below the limit of ${limit} g; ${t1.observed} packs are short by more than the tolerable negative error (${t1.limit} allowed).`,
    );
    // The same sentence on a German page: CLDR "de" writes the decimal separator as a comma.
    expect(releaseDecisions([nonconforming], lot, de)[0]!.sentence).toContain(`the mean is ${short.replace('.', ',')} g below the limit of ${limit.replace('.', ',')} g`);
  });

  it('asks for the second sample of a double plan, with the count the verdict names', () => {
    expect(undecided.decision).toBe('second-sample-required');
    const [d] = releaseDecisions([undecided], lot, en);
    expect(d!.action).toBe('sample-more');
    expect(d!.sentence).toMatch(new RegExp(`^Take ${undecided.secondSample!.additionalPacks} more packs from lot L-0412: the first sample alone cannot decide`));
    expect(d!.sentence).toContain(`${criterion(undecided, 't1').observed} packs are short by more than the tolerable negative error`);
  });

  it('makes no decision on too small a sample and says how many packs the plan needs', () => {
    expect(tooFew.decision).toBe('insufficient-data');
    const size = criterion(tooFew, 'sample-size');
    const [d] = releaseDecisions([tooFew], lot, en);
    expect(d!.action).toBe('no-decision');
    expect(d!.sentence).toBe(`No decision: ${size.observed} packs were measured where the plan needs ${size.limit}; measure at least ${size.limit} packs of lot L-0412 and submit the lot again.`);
  });

  it('gives one sentence per market, in order', () => {
    const both = releaseDecisions([conforming, nonconforming], lot, en);
    expect(both.map((d) => d.action)).toEqual(['release', 'hold']);
  });

  it('holds a lot the custom rules fail on the mean test, in words and without the test’s jargon', () => {
    const v = judge(wave(497, 1, 12), { id: 'custom', params: { alpha: 0.05 } });
    expect(v.decision).toBe('nonconforming');
    const [d] = releaseDecisions([v], lot, en);
    const mean = v.statistics.descriptive.mean.toFixed(1);
    expect(d!.sentence).toMatch(new RegExp(`^Hold: the mean ${mean.replace('.', '\\.')} g is below 500 g by more than chance explains \\(p < 0\\.0001, α = 0\\.05\\)\\.$`));
    expect(d!.sentence).not.toMatch(/H0|reject/);
  });
});

describe('explainMeanTest', () => {
  it('explains a test that finds no shortfall in plain words, with the page’s numbers', () => {
    const t = conforming.statistics.meanTest;
    const text = explainMeanTest(t, en, verdictQuantities(conforming.net));
    expect(text).not.toMatch(/H0|reject/);
    expect(text).toContain('no evidence that the lot’s mean is below 500 g');
    expect(text).toContain(`t = ${String(Number(t.statistic!.toFixed(3)))}`);
    expect(text).toContain(`${t.degreesOfFreedom} degrees of freedom`);
  });

  it('explains a test that shows a shortfall, flooring a vanishing probability', () => {
    const t = nonconforming.statistics.meanTest;
    expect(t.pValue).toBeLessThan(0.0001);
    const text = explainMeanTest(t, en, verdictQuantities(nonconforming.net));
    expect(text).toContain('below 0.0001');
    expect(text).toContain('shows that the lot’s mean is below 500 g');
    expect(explainMeanTest(t, de, verdictQuantities(nonconforming.net))).toContain('below 0,0001');
  });
});
