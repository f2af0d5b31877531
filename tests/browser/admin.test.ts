// The admin's path: a key issued, its secret shown once, used by a plain HTTP call, revoked, and
// the same call refused; and the other admin views drawn, at desktop and at tablet width.
import { describe, expect, it } from 'vitest';
import { screenshot, seedProduct, signIn, useHarness } from './support';

const h = useHarness('admin');

describe('API keys', () => {
  it('issues a key, shows the secret once, and the key works until it is revoked', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.admin);
    await page.locator('[data-nav-item="keys"]').click();
    await page.locator('[data-state="empty"]').waitFor();
    await page.getByLabel('Name').fill('Line 3 checkweigher gateway');
    // Defaults are lots:submit + verdicts:read; drop lots:submit, keep verdicts:read.
    await page.locator('[data-scope="lots:submit"]').uncheck();
    await page.getByRole('button', { name: 'Issue the key' }).click();
    const secret = (await page.locator('[data-secret]').innerText()).trim();
    expect(secret).toMatch(/^lpk_/);
    await screenshot(page, '30-key-secret-once');
    await page.locator('[data-secret-done]').click();
    await page.locator('[data-secret-panel]').waitFor({ state: 'detached' });
    // Shown once: the page no longer holds it anywhere.
    expect(await page.content()).not.toContain(secret);
    const prefix = secret.split('_').slice(0, 2).join('_');
    const row = page.locator('[data-key-row]').filter({ hasText: 'Line 3 checkweigher gateway' });
    expect(await row.locator('[data-key-status]').innerText()).toContain('active');
    expect(await row.innerText()).toContain('verdicts:read');
    expect(await row.innerText()).not.toContain('lots:submit');
    expect(prefix.length).toBeGreaterThan(4);

    // A plain HTTP call, as a plant system would make it.
    const ok = await fetch(`${h.baseUrl}/v1/verdicts?limit=1`, { headers: { Authorization: `Bearer ${secret}` } });
    expect(ok.status).toBe(200);
    const wrongScope = await fetch(`${h.baseUrl}/v1/api-keys`, { headers: { Authorization: `Bearer ${secret}` } });
    expect(wrongScope.status).toBe(403);

    await row.locator('[data-revoke]').click();
    await page.locator('[data-confirm]').waitFor();
    await screenshot(page, '31-key-revoke-confirm');
    await page.locator('[data-confirm]').click();
    await page.locator('[data-confirm]').waitFor({ state: 'detached' });
    await expect.poll(() => row.locator('[data-key-status]').innerText()).toContain('revoked');
    await screenshot(page, '32-keys');

    const refused = await fetch(`${h.baseUrl}/v1/verdicts?limit=1`, { headers: { Authorization: `Bearer ${secret}` } });
    expect(refused.status).toBe(401);
    expect(((await refused.json()) as { detail: string }).detail).toMatch(/revoked/);
  });

  it('says what is wrong with the form, by field, before sending', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.admin);
    await page.goto('/admin/keys');
    await page.locator('[data-scope="lots:submit"]').uncheck();
    await page.locator('[data-scope="verdicts:read"]').uncheck();
    await page.getByRole('button', { name: 'Issue the key' }).click();
    const messages = await page.locator('[data-field-error]').allInnerTexts();
    expect(messages).toEqual(['Give the key a name that says which system holds it.', 'Choose at least one scope.']);
  });
});

describe('the other admin views', () => {
  it('draws users, usage, webhooks and the audit trail', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.admin);
    // an admin lands on the verdicts (admins read verdicts, issue 16); users is a section beside them
    await page.locator('[data-nav-item="users"]').click();
    await page.locator('[data-users-table]').waitFor();
    expect(await page.locator('[data-user]').count()).toBe(3);
    await page.getByLabel('E-mail').fill('new.colleague@example.test');
    await page.getByRole('button', { name: 'Send the invitation' }).click();
    await page.locator('[data-invitations], [role="alert"]').first().waitFor();
    expect(await page.locator('[role="alert"]').allInnerTexts()).toEqual([]);
    await page.locator('[data-invitations]').getByText('new.colleague@example.test').waitFor();
    await screenshot(page, '33-users');

    await page.locator('[data-nav-item="usage"]').click();
    await page.locator('[data-chart="usage"] canvas[data-drawn="true"]').waitFor();
    await page.locator('[data-usage-table]').waitFor();
    await screenshot(page, '34-usage');

    await page.locator('[data-nav-item="webhooks"]').click();
    await page.getByLabel('Address').fill('not a web address');
    await page.getByRole('button', { name: 'Add the endpoint' }).click();
    expect(await page.locator('[data-field-error]').first().innerText()).toMatch(/web address|http/);
    await page.getByLabel('Address').fill('https://mes.example.test/hooks/lotproof');
    await page.getByRole('button', { name: 'Add the endpoint' }).click();
    await page.getByRole('dialog').getByText('whsec_').waitFor();
    await page.getByRole('button', { name: 'I have stored it' }).click();
    await page.getByRole('button', { name: 'Send a test event' }).click();
    await page.getByRole('status').filter({ hasText: 'test event is queued' }).waitFor();
    await page.getByRole('button', { name: 'Deliveries' }).click();
    await page.getByText('webhook.test').first().waitFor();
    await screenshot(page, '35-webhooks');

    await page.locator('[data-nav-item="audit-trail"]').click();
    await page.locator('[data-audit-events] li').first().waitFor();
    expect(await page.locator('[data-audit-events]').innerText()).toContain('User invited');
    await screenshot(page, '36-audit-trail');
  });

  it('lets an invited colleague join through the e-mailed link (caught by the development mailbox)', async () => {
    const { page } = await h.open();
    await page.goto('/dev/mailbox');
    await page.locator('[data-mail-list] button').filter({ hasText: 'invited' }).first().click();
    await screenshot(page, '37-dev-mailbox');
    await page.locator('[data-mail] a[href^="/accept-invite?token="]').click();
    await page.waitForURL(/\/accept-invite\?token=/);
    await page.getByLabel('Your name').fill('New Colleague');
    await page.getByLabel('Password', { exact: true }).fill('short');
    await page.getByLabel('Password again').fill('short');
    await page.getByRole('button', { name: 'Create my account' }).click();
    expect(await page.locator('[data-field-error]').first().innerText()).toMatch(/12/);
    await page.getByLabel('Password', { exact: true }).fill('a long enough passphrase');
    await page.getByLabel('Password again').fill('a long enough passphrase');
    await page.getByRole('button', { name: 'Create my account' }).click();
    await page.locator('[data-accepted]').waitFor();
    await signIn(page, 'new.colleague@example.test', 'a long enough passphrase');
    expect(await page.locator('[data-role]').innerText()).toBe('Quality engineer');
  });

  it('lets a quality engineer define a product with the API schema’s messages and the UK single plan, at tablet width', async () => {
    await seedProduct(h, { name: 'Sunflower oil 1 L', sku: 'OIL-1L', nominalQuantity: 1000, unit: 'mL', tareMode: 'none', fixedTare: null, density: 0.92 });
    const { page } = await h.open({ width: 820, height: 1100 });
    await signIn(page, h.users.quality);
    await page.locator('[data-nav-item="products"]').click();
    await page.locator('[data-product="OIL-1L"]').waitFor();
    await screenshot(page, '40-products-tablet');
    await page.locator('[data-new-product]').click();
    await page.getByLabel('SKU code').fill('bad sku!');
    await page.getByLabel('Nominal quantity Qn').fill('-5');
    await page.locator('[data-save-product]').click();
    const summary = await page.locator('[data-form-summary]').innerText();
    expect(summary).toMatch(/fields need attention/);
    expect(await page.locator('#p-sku-error').innerText()).toMatch(/letters, digits/i);
    expect(await page.locator('#p-qn-error').innerText()).toBe('The nominal quantity must be more than 0.');
    expect(await page.locator('#p-name-error').innerText()).toBe('Enter the name.');
    await screenshot(page, '41-product-form-errors-tablet');
    await page.getByLabel('SKU code').fill('HONEY-340G');
    await page.getByLabel('Name', { exact: true }).fill('Blossom honey 340 g');
    await page.getByLabel('Nominal quantity Qn').fill('340');
    await page.locator('[data-tne]').waitFor();
    // The UK single plan (SI 2006/659 Sch. 2 para 3.3–3.5), chosen from the eu-76-211 options.
    await page.locator('[data-choice="Non-destructive sampling plan"]').click();
    await page.getByRole('option', { name: /Single plan of the UK reference test/ }).click();
    await page.locator('[data-save-product]').click();
    await page.waitForURL(/\/products$/);
    await page.locator('[data-product="HONEY-340G"]').getByText('UK single plan').waitFor();
  });
});
