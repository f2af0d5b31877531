// The verdict report on a German and on an English page: every number one way, by the page's
// locale (provided to the component as the page would), never mixed, never in exponent notation
// and never with six significant digits. The verdict is the real engine's, for an invented lot.
// Separators: CLDR common/main/de.xml (decimal ",", group ".") and en.xml (decimal ".", group ",").
import { describe, expect, it } from 'vitest';
import { mount } from '@vue/test-utils';
import { evaluateLot } from '../../shared/engine';
import VerdictReport from '../../console/src/components/VerdictReport.vue';
import { FORMATS_KEY, createFormats } from '../../console/src/lib/format';

const wave = (centre: number, amplitude: number, n: number) => Array.from({ length: n }, (_, i) => centre + amplitude * Math.sin(i * 1.7));
const measurements = [...wave(496, 3, 47), 480, 481, 479];
const judged = evaluateLot({
  product: { nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211' } },
  lot: { lotSize: 3000, testing: 'non-destructive', measurementUnit: 'g', measurements },
});
if (!judged.ok) throw new Error(judged.error.message);
const verdict = judged.verdict;

function pageText(locale: string): string {
  const w = mount(VerdictReport, {
    props: { verdict, net: measurements, lotCode: 'L-77' },
    global: { provide: { [FORMATS_KEY as symbol]: createFormats(locale) } },
  });
  const text = w.text();
  w.unmount();
  return text;
}

/** The numbers of a text, without citations (clause numbers, directive numbers, the engine's version). */
function numbers(text: string): string[] {
  const cleaned = text
    .replace(/Rulebook source:.*$/m, '')
    .replace(/engine \d+\.\d+\.\d+/g, '')
    .replace(/\d+\/\d+(\/EEC)?/g, '')
    .replace(/(Annex [IVX]+|para|Sch\.|Schedule)\s+[\d.–, ]+/g, '');
  return [...cleaned.matchAll(/\d[\d.,]*\d|\d/g)].map((m) => m[0]);
}

describe('the verdict report’s numbers', () => {
  it('are written the German way on a German page', () => {
    const text = pageText('de-DE');
    expect(text).toContain('3.000 packs'); // the lot size in the plan's sentence, grouped with "."
    expect(text).toMatch(/Mean\s*\d{3},\d g/);
    for (const n of numbers(text)) expect(n, `"${n}" on the German page`).toMatch(/^\d{1,3}(\.\d{3})*(,\d{1,4})?$/);
    expect(text).not.toMatch(/e[−-]\d/);
  });

  it('are written the English way on an English page', () => {
    const text = pageText('en-GB');
    expect(text).toContain('3,000 packs');
    expect(text).toMatch(/Mean\s*\d{3}\.\d g/);
    for (const n of numbers(text)) expect(n, `"${n}" on the English page`).toMatch(/^\d{1,3}(,\d{3})*(\.\d{1,4})?$/);
    expect(text).not.toMatch(/e[−-]\d/);
  });

  it('opens with the release decision and keeps the caution, with the test’s jargon gone', () => {
    const w = mount(VerdictReport, { props: { verdict, net: measurements, lotCode: 'L-77' } });
    const first = w.find('[data-decision-sentences] li');
    expect(first.attributes('data-action')).toBe(verdict.decision === 'conforming' ? 'release' : verdict.decision === 'nonconforming' ? 'hold' : 'sample-more');
    expect(w.find('[data-caution]').text()).toMatch(/responsible person.*competent authority prevail/);
    expect(w.text()).not.toMatch(/reject H0|H0:/);
    w.unmount();
  });
});
