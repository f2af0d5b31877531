// Each role signs in through the real sign-in form and sees only its own sections; the router
// also refuses a section of another role typed into the address bar.
import { describe, expect, it } from 'vitest';
import { navigationNames, screenshot, signIn, useHarness } from './support';

const h = useHarness('navigation');

describe('navigation per role', () => {
  it('shows the sign-in page to a visitor and sends guarded addresses there', async () => {
    const { page } = await h.open();
    await page.goto('/admin/keys');
    await page.waitForURL(/\/sign-in\?next=/);
    await screenshot(page, '01-sign-in');
  });

  it('gives an admin verdicts, users, keys, usage, webhooks, the ledger (its witnesses) and the audit trail', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.admin);
    expect(await navigationNames(page)).toEqual(['verdicts', 'users', 'keys', 'usage', 'webhooks', 'ledger', 'audit-trail']);
    await page.goto('/products');
    await page.waitForURL(/\/verdicts$/);
  });

  it('gives a quality engineer verdicts, lots and products', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.quality);
    expect(await navigationNames(page)).toEqual(['verdicts', 'lot-new', 'products']);
    await page.goto('/admin/keys');
    await page.waitForURL(/\/verdicts$/);
  });

  it('gives an auditor verdicts, the seal lookup, the ledger and the audit trail', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.auditor);
    expect(await navigationNames(page)).toEqual(['verdicts', 'audit-lookup', 'ledger', 'audit-trail']);
  });

  it('signs out, and the session cookie is HttpOnly so the page cannot read it', async () => {
    const { page, context } = await h.open();
    await signIn(page, h.users.auditor);
    const cookie = (await context.cookies()).find((c) => c.name === 'lotproof_session');
    expect(cookie?.httpOnly).toBe(true);
    expect(await page.evaluate(() => document.cookie)).not.toContain('lotproof_session');
    expect(await page.evaluate(() => Object.keys(localStorage).length)).toBe(0);
    await page.locator('[data-account-menu]').click();
    await page.locator('[data-sign-out]').click();
    await page.waitForURL(/\/sign-in/);
  });
});
