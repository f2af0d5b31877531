// Every decision badge, and every Met / Not met / Open mark beside a criterion, is readable:
// contrast of at least 4.5:1 between its text and its background (WCAG 2.2 success criterion
// 1.4.3, level AA, for text under 18 pt). The colours are read from the classes the components
// actually render and resolved in the theme they come from (console/src/assets/main.css, the
// `--color-*` tokens of its @theme blocks); the ratio is computed here from WCAG 2.2's own
// definitions of "relative luminance" (sRGB, linearised with the 0.04045 threshold) and "contrast
// ratio" ((L1 + 0.05) / (L2 + 0.05)).
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { mount } from '@vue/test-utils';
import DecisionBadge from '../../console/src/components/DecisionBadge.vue';

const css = readFileSync('console/src/assets/main.css', 'utf8');
const THEME = new Map([...css.matchAll(/--color-([a-z-]+):\s*(#[0-9a-f]{6})\s*;/gi)].map((m) => [m[1]!, m[2]!.toLowerCase()]));

function relativeLuminance(hex: string): number {
  const [r, g, b] = [1, 3, 5].map((i) => {
    const c = parseInt(hex.slice(i, i + 2), 16) / 255;
    return c <= 0.04045 ? c / 12.92 : ((c + 0.055) / 1.055) ** 2.4;
  });
  return 0.2126 * r! + 0.7152 * g! + 0.0722 * b!;
}
function contrast(a: string, b: string): number {
  const [hi, lo] = [relativeLuminance(a), relativeLuminance(b)].sort((x, y) => y - x);
  return (hi! + 0.05) / (lo! + 0.05);
}
function colour(token: string): string {
  const hex = THEME.get(token);
  if (!hex) throw new Error(`--color-${token} is not in main.css`);
  return hex;
}

describe('contrast of decision colours', () => {
  it('computes WCAG’s contrast ratio: black on white is 21:1, a colour on itself 1:1', () => {
    expect(contrast('#000000', '#ffffff')).toBeCloseTo(21, 10);
    expect(contrast('#1f5d63', '#1f5d63')).toBe(1);
  });

  for (const decision of ['conforming', 'nonconforming', 'second-sample-required', 'insufficient-data']) {
    it(`the ${decision} badge has at least 4.5:1 between its text and its background`, () => {
      const w = mount(DecisionBadge, { props: { decision } });
      const classes = w.find(`[data-decision="${decision}"]`).classes();
      const text = classes.find((c) => /^text-[a-z]+(-[a-z]+)?$/.test(c) && THEME.has(c.slice(5)));
      const bg = classes.find((c) => /^bg-[a-z]+(-[a-z]+)?$/.test(c) && THEME.has(c.slice(3)));
      expect(text, 'a text colour from the theme').toBeDefined();
      expect(bg, 'a background colour from the theme').toBeDefined();
      expect(contrast(colour(text!.slice(5)), colour(bg!.slice(3)))).toBeGreaterThanOrEqual(4.5);
    });
  }

  it('every criterion mark of the verdict report has at least 4.5:1', () => {
    const source = readFileSync('console/src/components/VerdictReport.vue', 'utf8');
    const pairs = [...source.matchAll(/'bg-([a-z]+-soft) text-([a-z]+)'/g)].map((m) => [m[1]!, m[2]!] as const);
    expect(pairs.length).toBe(3);
    for (const [bg, text] of pairs) expect(contrast(colour(text), colour(bg)), `${text} on ${bg}`).toBeGreaterThanOrEqual(4.5);
  });
});
