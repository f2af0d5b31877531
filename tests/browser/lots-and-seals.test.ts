// The quality engineer's path and the auditor's: a CSV read and judged in the browser, sent with a
// progress bar, its sealed verdict drawn; then the seal checked in the auditor's browser, and a
// tampered export refused.
import { beforeAll, describe, expect, it } from 'vitest';
import { demoCsv, pickProduct, screenshot, seedProduct, signIn, useHarness } from './support';

const h = useHarness('lots');
let product: { id: string; sku: string; name: string };
let verdictId = '';
let seal = '';

beforeAll(async () => {
  product = await seedProduct(h, { name: 'Rolled oats 500 g (browser test)' });
});

describe('submitting a lot by hand', () => {
  it('previews a demo CSV with the engine, sends it, and opens the sealed verdict with its charts drawn', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.quality);
    await page.locator('[data-nav-item="lot-new"]').click();
    // By keyboard: type part of the name, the first match is active, Enter takes it.
    await pickProduct(page, 'browser test', /Rolled oats 500 g \(browser test\)/);
    await page.getByLabel('Lot code').fill('L-BRW-0001');
    await page.getByLabel('Line').fill('Line 2');
    await page.getByLabel('Lot size (packs)').fill('4800');
    await page.locator('[data-csv-input]').setInputFiles({ name: 'oats-lot.csv', mimeType: 'text/csv', buffer: Buffer.from(demoCsv()) });

    await page.locator('[data-preview-ready]').waitFor();
    expect(await page.locator('[data-preview-ready]').innerText()).toContain('60 values read from the column “gross_g”');
    expect(await page.locator('[data-preview] [data-decision]').first().getAttribute('data-decision')).toBe('conforming');
    await page.locator('[data-preview] [data-chart="histogram"] canvas[data-drawn="true"]').waitFor();
    await screenshot(page, '10-lot-preview');

    await page.locator('[data-send-lot]').click();
    await page.waitForURL(/\/verdicts\/[0-9a-f-]{36}$/);
    verdictId = page.url().split('/').pop()!;
    for (const chart of ['histogram', 'run', 't']) {
      await page.locator(`[data-chart="${chart}"] canvas[data-drawn="true"]`).waitFor();
    }
    expect(await page.locator('[data-decision]').first().getAttribute('data-decision')).toBe('conforming');
    expect(await page.locator('[data-criteria] li').count()).toBeGreaterThanOrEqual(3);
    expect(await page.locator('[data-caution]').innerText()).toContain('local weights-and-measures law and the competent authority prevail');
    seal = (await page.locator('[data-seal]').innerText()).trim();
    expect(seal).toMatch(/^[0-9a-f]{64}$/);
    await page.locator('[data-check="hash"][data-state="pass"]').waitFor();
    await page.locator('[data-check="signature"][data-state="pass"]').waitFor();
    await screenshot(page, '11-verdict-detail');
  });

  it('lists the verdict and filters it by decision and lot code on the server', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.quality);
    await page.locator('[data-verdict-row]').first().waitFor();
    expect(await page.locator('[data-verdict-row]').count()).toBe(1);
    await screenshot(page, '12-verdicts');
    await page.goto('/verdicts?decision=nonconforming');
    await page.locator('[data-state="empty"]').waitFor();
    await page.goto('/verdicts?lot=L-BRW-0001');
    await page.locator('[data-verdict-row]').first().waitFor();
    const exportHref = await page.locator('[data-export-csv]').getAttribute('href');
    expect(exportHref).toContain('/v1/exports/verdicts?format=csv');
    const csv = await page.request.get(exportHref!);
    expect(csv.status()).toBe(200);
    expect(await csv.text()).toContain('L-BRW-0001');
  });
});

describe('the auditor checks a seal in the browser', () => {
  it('looks up the seal and sees the hash, the signature and the chain link pass', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.auditor);
    await page.locator('[data-nav-item="audit-lookup"]').click();
    await page.getByLabel('Seal or sealed document').fill(seal);
    await page.getByRole('button', { name: 'Check', exact: true }).click();
    await page.locator('[data-lookup-result]').waitFor();
    for (const check of ['hash', 'signature', 'chain-link']) {
      expect(await page.locator(`[data-check="${check}"]`).getAttribute('data-state')).toBe('pass');
    }
    expect(await page.locator('[data-lookup-result]').getAttribute('data-verdict')).toBe('pass');
    expect(page.url()).toContain(`/verify/${seal}`);
    await screenshot(page, '20-seal-lookup');
  });

  it('opens /verify/<seal> directly', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.auditor);
    await page.goto(`/verify/${seal}`);
    await page.locator('[data-lookup-result][data-verdict="pass"]').waitFor();
  });

  it('refuses an exported verdict whose record was changed: the hash recomputed here differs', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.auditor);
    const exported = await page.request.get(`/v1/verdicts/${verdictId}/export`);
    expect(exported.status()).toBe(200);
    const doc = await exported.json();
    // The untouched export checks out…
    await page.goto('/audit/lookup');
    await page.getByLabel('Seal or sealed document').fill(JSON.stringify(doc));
    await page.getByRole('button', { name: 'Check', exact: true }).click();
    await page.locator('[data-lookup-result][data-verdict="pass"]').waitFor();
    // …and one changed measurement is caught.
    doc.record.input.lot.measurements[0] += 5;
    await page.getByLabel('Seal or sealed document').fill(JSON.stringify(doc));
    await page.getByRole('button', { name: 'Check', exact: true }).click();
    await page.locator('[data-lookup-result][data-verdict="fail"]').waitFor();
    expect(await page.locator('[data-check="hash"]').getAttribute('data-state')).toBe('fail');
    expect(await page.locator('[data-check="signature"]').getAttribute('data-state')).toBe('pass');
    await page.locator('[data-copy-differs]').waitFor();
    await screenshot(page, '21-seal-lookup-tampered');
  });

  it('shows the ledger intact', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.auditor);
    await page.locator('[data-nav-item="ledger"]').click();
    await page.locator('[data-ledger][data-intact="true"]').waitFor();
    await screenshot(page, '22-ledger');
  });
});
