// Issue 16, "Withdrawal" and "Finding lots": a quality user withdraws a sealed verdict from its
// page with a reason (the dialog says a withdrawal does not recall a released lot); the page then
// shows it withdrawn (who, when, why); the list marks it, its status filter finds it and the summary
// counts it. The finder's lot code and line match any part in any case, and its two date ranges
// (packing, sealing) are kept apart. Decisions here are the engine's own (asserted from the API's
// reply, not assumed); the lots are invented demo lots.
import { QueryTypes } from 'sequelize';
import { beforeAll, describe, expect, it } from 'vitest';
import type { Page } from 'playwright-core';
import { issueApiKey } from '../../server/identity/api-key-store';
import { measurements } from '../support/lots';
import { screenshot, seedProduct, signIn, useHarness } from './support';

const h = useHarness('withdrawal');
const REASON = 'Lot code mistyped at the scale; re-submitted under the right code (demo).';
let withdrawnLot: { id: string; decision: string };
let keptLot: { id: string; decision: string };
let apiSecret = '';
let productSku = '';

async function submit(secret: string, sku: string, lotCode: string, line: string, packedAt: string, seed: number) {
  const res = await fetch(`${h.baseUrl}/v1/lots`, {
    method: 'POST',
    headers: { Authorization: `Bearer ${secret}`, 'Content-Type': 'application/json' },
    body: JSON.stringify({ sku, lotCode, line, packedAt, lotSize: 400, testing: 'non-destructive', measurementUnit: 'g', measurementBasis: 'net', measurements: measurements(seed, 30, 504, 1.5) }),
  });
  const body = await res.json();
  if (res.status !== 201) throw new Error(`lot ${lotCode}: ${res.status} ${JSON.stringify(body)}`);
  return { id: body.id as string, decision: body.decision as string };
}

beforeAll(async () => {
  const product = await seedProduct(h, { tareMode: 'none', fixedTare: null, name: 'Rolled oats 500 g (withdrawal, demo)' });
  const { secret } = await issueApiKey({ organisationId: h.organisationId, name: 'withdrawal test', scopes: ['lots:submit'] });
  apiSecret = secret;
  productSku = product.sku;
  withdrawnLot = await submit(secret, product.sku, 'L-WDRAW-7', 'Line 5 (demo)', '2026-03-10T09:00:00Z', 1607);
  keptLot = await submit(secret, product.sku, 'L-KEEP-1', 'Line 6 (demo)', '2026-03-20T09:00:00Z', 1620);
});

const withdrawals = async () =>
  (await h.testApp.ctx.db.sequelize.query<{ n: number }>('SELECT count(*)::int AS n FROM verdict_withdrawals WHERE organisation_id = $1', { bind: [h.organisationId], type: QueryTypes.SELECT }))[0]!.n;

const lotCodes = (page: Page) => page.locator('[data-verdict-row] td:first-child a').allInnerTexts();
const count = async (page: Page, key: string) => (await page.locator(`[data-count="${key}"] dd`).innerText()).trim();

/** Change the finder's filters in the page and wait for the list the server sends back. */
async function find(page: Page, change: () => Promise<void>) {
  await change();
  const reply = page.waitForResponse((r) => r.url().includes('/v1/verdicts?') && r.request().method() === 'GET');
  await page.locator('[data-find]').click();
  await reply;
  await page.locator('[data-verdicts-table]').or(page.locator('[data-state="empty"]')).first().waitFor();
}

describe('withdrawing a verdict in the console', () => {
  it('needs a reason, warns that no lot is recalled, and marks the verdict withdrawn: who, when, why', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.quality);
    await page.goto(`/verdicts/${withdrawnLot.id}`);
    await page.locator('[data-withdraw]').click();
    const dialog = page.locator('[data-withdraw-dialog]');
    await dialog.waitFor();
    expect(await dialog.locator('[data-withdraw-caution]').innerText()).toContain('does not recall a lot already released');

    // No reason: refused in the form, and nothing is sealed.
    await dialog.locator('[data-confirm-withdraw]').click();
    expect(await dialog.locator('[data-field-error]').innerText()).toContain('Say why the verdict is withdrawn');
    expect(await withdrawals()).toBe(0);

    await page.getByLabel('Why the verdict is withdrawn').fill(REASON);
    await screenshot(page, '90-withdraw-dialog');
    await dialog.locator('[data-confirm-withdraw]').click();
    const mark = page.locator('[data-withdrawn]');
    await mark.waitFor();
    expect(await withdrawals()).toBe(1);
    expect(await mark.locator('[data-withdrawn-reason]').innerText()).toBe(REASON);
    expect(await mark.locator('[data-withdrawn-by]').innerText()).toBe(h.users.quality);
    const row = (
      await h.testApp.ctx.db.sequelize.query<{ recorded_at: Date }>('SELECT recorded_at FROM verdict_withdrawals WHERE verdict_id = $1', { bind: [withdrawnLot.id], type: QueryTypes.SELECT })
    )[0]!;
    expect(new Date((await mark.locator('[data-withdrawn-at]').getAttribute('datetime'))!).getTime()).toBe(row.recorded_at.getTime());
    expect(await dialog.count()).toBe(0);
    // Withdrawn once: the action is gone, and a reload still shows the mark (it comes from the server).
    expect(await page.locator('[data-withdraw]').count()).toBe(0);
    await page.reload();
    await page.locator('[data-withdrawn]').waitFor();
    await screenshot(page, '91-verdict-withdrawn');
  });

  it('is not offered to an auditor', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.auditor);
    await page.goto(`/verdicts/${keptLot.id}`);
    await page.locator('[data-lot-facts]').waitFor();
    expect(await page.locator('[data-withdraw]').count()).toBe(0);
  });
});

describe('finding lots in the verdicts list', () => {
  it('marks the withdrawn verdict, finds it by status, and counts it', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.quality);
    await page.goto('/verdicts');
    await page.locator('[data-counts]').waitFor();
    expect((await lotCodes(page)).sort()).toEqual(['L-KEEP-1', 'L-WDRAW-7']);
    expect(await page.locator('[data-verdict-row][data-withdrawn]').count()).toBe(1);
    expect(await page.locator('[data-verdict-row][data-withdrawn] td:first-child a').innerText()).toBe('L-WDRAW-7');
    expect(await page.locator('[data-withdrawn-mark]').count()).toBe(1);
    expect(await count(page, 'total')).toBe('2');
    expect(await count(page, 'withdrawn')).toBe('1');
    await screenshot(page, '92-verdicts-withdrawn');

    await find(page, async () => {
      await page.locator('[data-choice="Status"]').click();
      await page.getByRole('option', { name: 'Withdrawn', exact: true }).click();
    });
    expect(page.url()).toContain('status=withdrawn');
    expect(await lotCodes(page)).toEqual(['L-WDRAW-7']);
    expect(await count(page, 'total')).toBe('1');
    expect(await count(page, 'withdrawn')).toBe('1');
    // A withdrawn verdict counts under no decision.
    for (const key of ['conforming', 'nonconforming', 'awaitingSecondSample', 'insufficientData']) expect(await count(page, key), key).toBe('0');

    await find(page, async () => {
      await page.locator('[data-choice="Status"]').click();
      await page.getByRole('option', { name: 'Not withdrawn' }).click();
    });
    expect(await lotCodes(page)).toEqual(['L-KEEP-1']);
    expect(await count(page, 'withdrawn')).toBe('0');
    expect(await count(page, 'total')).toBe('1');
    const kept = { conforming: 'conforming', nonconforming: 'nonconforming', 'second-sample-required': 'awaitingSecondSample', 'insufficient-data': 'insufficientData' }[keptLot.decision]!;
    expect(await count(page, kept)).toBe('1');
  });

  it('matches any part of a lot code or line in any case, and keeps packing and sealing days apart', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.quality);
    await page.goto('/verdicts');
    await page.locator('[data-verdict-row]').first().waitFor();

    await find(page, () => page.getByLabel('Lot code').fill('wdraw'));
    expect(await lotCodes(page)).toEqual(['L-WDRAW-7']);
    await find(page, async () => {
      await page.getByLabel('Lot code').fill('');
      await page.getByLabel('Line').fill('line 6');
    });
    expect(await lotCodes(page)).toEqual(['L-KEEP-1']);
    await find(page, async () => {
      await page.getByLabel('Line').fill('');
      await page.getByLabel('Packed from').fill('2026-03-15');
    });
    expect(page.url()).toContain('packedFrom=2026-03-15');
    expect(await lotCodes(page)).toEqual(['L-KEEP-1']);
    expect(await count(page, 'total')).toBe('1');
    // Both were sealed today, whatever their packing days: a sealing range from today finds both.
    const today = await page.evaluate(() => {
      const d = new Date();
      return `${d.getFullYear()}-${String(d.getMonth() + 1).padStart(2, '0')}-${String(d.getDate()).padStart(2, '0')}`;
    });
    await find(page, async () => {
      await page.getByLabel('Packed from').fill('');
      await page.getByLabel('Sealed from').fill(today);
    });
    expect((await lotCodes(page)).sort()).toEqual(['L-KEEP-1', 'L-WDRAW-7']);
    await find(page, () => page.getByLabel('Packed to').fill('2026-03-01'));
    await page.locator('[data-state="empty"]').waitFor();
    expect(await count(page, 'total')).toBe('0');
    await screenshot(page, '93-verdicts-finder');
  });
});

describe('a verdict withdrawn meanwhile', () => {
  // Last in this file: the lot it adds would change the counts the finder's tests check.
  it('is refused in the dialog with the reason why, and the page shows the withdrawal that came first', async () => {
    const race = await submit(apiSecret, productSku, 'L-RACE-2', 'Line 5 (demo)', '2026-03-12T09:00:00Z', 1612);
    const { page } = await h.open();
    await signIn(page, h.users.admin);
    await page.goto(`/verdicts/${race.id}`);
    await page.locator('[data-withdraw]').click();
    const dialog = page.locator('[data-withdraw-dialog]');
    await page.getByLabel('Why the verdict is withdrawn').fill('Withdrawn from the console second (demo).');
    // Meanwhile the line's gateway withdraws it through the API.
    const res = await fetch(`${h.baseUrl}/v1/verdicts/${race.id}/withdrawal`, {
      method: 'POST',
      headers: { Authorization: `Bearer ${apiSecret}`, 'Content-Type': 'application/json' },
      body: JSON.stringify({ reason: 'Withdrawn by the gateway first (demo).' }),
    });
    expect(res.status).toBe(201);
    await dialog.locator('[data-confirm-withdraw]').click();
    await dialog.locator('[role="alert"]').waitFor();
    await page.getByRole('button', { name: 'Cancel' }).click();
    const mark = page.locator('[data-withdrawn]');
    await mark.waitFor();
    expect(await mark.locator('[data-withdrawn-reason]').innerText()).toBe('Withdrawn by the gateway first (demo).');
    expect(await mark.locator('[data-withdrawn-by]').innerText()).toMatch(/^API key “withdrawal test” \(.+…\)$/);
    const n = (
      await h.testApp.ctx.db.sequelize.query<{ n: number }>('SELECT count(*)::int AS n FROM verdict_withdrawals WHERE verdict_id = $1', { bind: [race.id], type: QueryTypes.SELECT })
    )[0]!.n;
    expect(n).toBe(1);
    expect(await page.locator('[data-withdraw]').count()).toBe(0);
  });
});
