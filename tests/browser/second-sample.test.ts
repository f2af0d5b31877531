// Issue 16, "Second sample": a lot whose first sample asks for more packs is completed from its
// verdict page: "Take N more packs from lot X" opens the lot form prefilled and linked to the first
// sample; the new verdict judges both samples together and each verdict links to the other.
import { QueryTypes } from 'sequelize';
import { beforeAll, describe, expect, it } from 'vitest';
import { issueApiKey } from '../../server/identity/api-key-store';
import { measurements } from '../support/lots';
import { screenshot, seedProduct, signIn, useHarness } from './support';

const h = useHarness('second-sample');
let first: { id: string; additionalPacks: number; lotCode: string };

beforeAll(async () => {
  const product = await seedProduct(h, { tareMode: 'none', fixedTare: null, name: 'Rolled oats 500 g (second sample)' });
  const { secret } = await issueApiKey({ organisationId: h.organisationId, name: 'second sample test', scopes: ['lots:submit'] });
  // Directive 76/211/EEC Annex II 2.2.1, lots of 100 to 500: first sample 30, accepted with at most
  // 1 pack below T1 (485 g for Qn 500 g), rejected with 3 or more; 2 below T1 ask for a second sample.
  const res = await fetch(`${h.baseUrl}/v1/lots`, {
    method: 'POST',
    headers: { Authorization: `Bearer ${secret}`, 'Content-Type': 'application/json' },
    body: JSON.stringify({
      sku: product.sku,
      lotCode: 'L-SECOND-1',
      line: 'Line 4 (demo)',
      lotSize: 400,
      testing: 'non-destructive',
      measurementUnit: 'g',
      measurementBasis: 'net',
      measurements: [...measurements(31, 28, 504, 1.5), 480.0, 481.0],
    }),
  });
  const body = await res.json();
  if (res.status !== 201) throw new Error(`lot: ${res.status} ${JSON.stringify(body)}`);
  expect(body.decision).toBe('second-sample-required');
  first = { id: body.id, additionalPacks: body.result.secondSample.additionalPacks, lotCode: 'L-SECOND-1' };
});

const verdictCount = async () =>
  (await h.testApp.ctx.db.sequelize.query<{ n: number }>('SELECT count(*)::int AS n FROM verdicts WHERE organisation_id = $1', { bind: [h.organisationId], type: QueryTypes.SELECT }))[0]!.n;

describe('a lot that needs a second sample', () => {
  it('is completed from its verdict page: prefilled, linked to the first, judged on both samples', async () => {
    // Directive 76/211/EEC Annex II 2.2.1: the second sample of a lot of 100–500 is 30 packs.
    expect(first.additionalPacks).toBe(30);
    const { page } = await h.open();
    await signIn(page, h.users.quality);
    await page.goto(`/verdicts/${first.id}`);
    const offer = page.locator('[data-second-sample-needed]');
    await offer.waitFor();
    expect(await offer.innerText()).toContain('Take 30 more packs from lot L-SECOND-1');
    await screenshot(page, '80-second-sample-offer');
    await page.locator('[data-take-second-sample]').click();

    // The form: the lot code prefilled, recognised as awaiting its second sample, the first's lot data locked.
    await page.waitForURL(/\/lots\/new\?secondSampleOf=/);
    await page.locator('[data-known-lot]').waitFor();
    expect(await page.getByLabel('Lot code').inputValue()).toBe('L-SECOND-1');
    expect(await page.locator('[data-mode="second-sample"]').isChecked()).toBe(true);
    expect(await page.locator('[data-known-lot]').innerText()).toContain('take 30 more packs from the lot');
    await page.waitForFunction(() => (document.getElementById('lot-size') as HTMLInputElement | null)?.value === '400');
    expect(await page.getByLabel('Lot size (packs)').isDisabled()).toBe(true);

    const csv = `net_g\n${measurements(32, 30, 504, 1.5).join('\n')}\n`;
    await page.locator('[data-csv-input]').setInputFiles({ name: 'second-sample.csv', mimeType: 'text/csv', buffer: Buffer.from(csv) });
    await page.locator('[data-preview-ready]').waitFor();
    expect(await page.locator('[data-preview-ready]').innerText()).toContain('Judged together with the first sample');
    expect(await page.locator('[data-send-lot]').innerText()).toBe('Send the second sample and seal');
    await screenshot(page, '81-second-sample-form');
    const before = await verdictCount();
    await page.locator('[data-send-lot]').click();
    await page.waitForURL(/\/verdicts\/[0-9a-f-]{36}$/);
    const secondId = page.url().split('/').pop()!;
    expect(secondId).not.toBe(first.id);
    expect(await verdictCount()).toBe(before + 1);

    // The second verdict: linked to the first, judged on 60 packs.
    await page.locator('[data-first-sample]').waitFor();
    expect(await page.locator('[data-first-sample] a').getAttribute('href')).toBe(`/verdicts/${first.id}`);
    expect(await page.locator('[data-figures]').innerText()).toMatch(/Packs judged\s+60/);
    const decision = await page.locator('[data-decision]').first().getAttribute('data-decision');
    expect(['conforming', 'nonconforming']).toContain(decision);
    await screenshot(page, '82-second-sample-verdict');

    // The first verdict now names the verdict that completed it, and offers no second sample any more.
    await page.goto(`/verdicts/${first.id}`);
    await page.locator('[data-second-sample-done]').waitFor();
    expect(await page.locator('[data-second-sample-done] a').getAttribute('href')).toBe(`/verdicts/${secondId}`);
    expect(await page.locator('[data-second-sample-needed]').count()).toBe(0);
  });
});
