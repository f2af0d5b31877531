// The verdict page as a German quality manager sees and prints it: the release decision first,
// every number written the German way (CLDR common/main/de.xml: decimal ",", group "."), and in
// print (CSS Media Queries, `print` media type) no navigation, buttons or dialogs, with the
// decision, criteria, figures, charts, caution and seal kept, on at most two A4 pages.
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { issueApiKey } from '../../server/identity/api-key-store';
import { SCREENSHOTS, screenshot, seedProduct, signIn, useHarness } from './support';
import { measurements } from '../support/lots';

const h = useHarness('print');
let verdictId: string;
beforeAll(async () => {
  const product = await seedProduct(h, { tareMode: 'none', fixedTare: null });
  const { secret } = await issueApiKey({ organisationId: h.organisationId, name: 'print test', scopes: ['lots:submit'] });
  const res = await fetch(`${h.baseUrl}/v1/lots`, {
    method: 'POST',
    headers: { Authorization: `Bearer ${secret}`, 'Content-Type': 'application/json' },
    body: JSON.stringify({
      sku: product.sku,
      lotCode: 'L-PRINT-1',
      lotSize: 3000,
      testing: 'non-destructive',
      measurementUnit: 'g',
      measurementBasis: 'net',
      measurements: measurements(11, 50, 503.4, 2.1),
    }),
  });
  const body = await res.json();
  if (res.status !== 201) throw new Error(`lot: ${res.status} ${JSON.stringify(body)}`);
  verdictId = body.id;
});

describe('the verdict page in German, on screen and in print', () => {
  it('opens with the decision, writes numbers the German way and prints the record without the screen’s controls', async () => {
    const { page, context } = await h.open();
    // A German browser: Chromium's locale and Accept-Language, as its settings would give them.
    const cdp = await context.newCDPSession(page);
    await cdp.send('Emulation.setLocaleOverride', { locale: 'de-DE' });
    await cdp.send('Network.setUserAgentOverride', { userAgent: await page.evaluate(() => navigator.userAgent), acceptLanguage: 'de-DE,de' });
    await signIn(page, h.users.quality);
    await page.goto(`/verdicts/${verdictId}`);
    await page.locator('[data-decision-sentences] li').first().waitFor();
    expect(await page.evaluate(() => navigator.language)).toBe('de-DE');

    const sentence = await page.locator('[data-decision-sentences] li').first().innerText();
    expect(sentence).toMatch(/^(Release|Hold|Take \d+ more packs|No decision):/);
    const lotSize = await page.locator('[data-lot-facts]').innerText();
    expect(lotSize).toContain('3.000 packs');
    const figures = await page.locator('[data-figures]').innerText();
    expect(figures).toMatch(/Mean\s+\d{3},\d g/);
    expect(figures).not.toMatch(/\d\.\d{1,2}\b(?!\d)/); // no decimal point beside decimal commas
    await screenshot(page, '60-verdict-de');

    await page.emulateMedia({ media: 'print' });
    for (const hidden of ['header', 'nav', '[data-recompute]', '[data-print]', '[data-export-document]']) {
      expect(await page.locator(hidden).first().isVisible(), `${hidden} in print`).toBe(false);
    }
    for (const kept of ['[data-decision-sentences]', '[data-criteria]', '[data-figures]', '[data-chart="histogram"]', '[data-caution]', '[data-seal]']) {
      expect(await page.locator(kept).first().isVisible(), `${kept} in print`).toBe(true);
    }
    expect(await page.locator('button:visible').count()).toBe(0);
    await screenshot(page, '61-verdict-print');

    // The printed pages: Chromium's own PDF of the print layout; each page is one /Type /Page object (ISO 32000-1 §7.7.3.3).
    const pdf = await page.pdf({ format: 'A4', printBackground: true });
    writeFileSync(join(SCREENSHOTS, '61-verdict-print.pdf'), pdf);
    const pages = (pdf.toString('latin1').match(/\/Type\s*\/Page(?!s)/g) ?? []).length;
    expect(pages).toBeGreaterThanOrEqual(1);
    expect(pages).toBeLessThanOrEqual(2);
  });
});
