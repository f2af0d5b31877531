// A forgotten password, end to end in the browser: ask for a link from the sign-in page, open the
// e-mail in the development mailbox, follow the link, set a new password, and sign in with it
// (the old one is refused afterwards, and the link works only once).
import { describe, expect, it } from 'vitest';
import { PASSWORD, screenshot, signIn, useHarness } from './support';

const h = useHarness('reset');

describe('password reset', () => {
  it('sends a link to the dev mailbox, sets a new password through it, and signs in with that', async () => {
    const email = h.users.auditor;
    const fresh = 'a brand new reset passphrase';
    const { page } = await h.open();

    await page.goto('/sign-in');
    await page.getByRole('link', { name: 'Forgot your password?' }).click();
    await page.waitForURL(/\/reset-password$/);
    await page.getByLabel('E-mail').fill(email);
    await page.getByRole('button', { name: 'Send the link' }).click();
    expect(await page.locator('[data-reset-done]').innerText()).toContain(email);
    await screenshot(page, '50-reset-requested');

    await page.goto('/dev/mailbox');
    await page.locator('[data-mail-list] button').filter({ hasText: 'Reset your Lotproof password' }).filter({ hasText: email }).first().click();
    const link = page.locator('[data-mail] a[href^="/reset-password?token="]');
    const href = await link.getAttribute('href');
    await link.click();
    await page.waitForURL(/\/reset-password\?token=/);

    // The two fields must agree, and the schema's length rule shows on the field.
    await page.getByLabel('New password', { exact: true }).fill(fresh);
    await page.getByLabel('New password again').fill(`${fresh}!`);
    await page.getByRole('button', { name: 'Set the password' }).click();
    expect(await page.locator('[data-field-error]').first().innerText()).toMatch(/differ/);
    await page.getByLabel('New password', { exact: true }).fill('short');
    await page.getByLabel('New password again').fill('short');
    await page.getByRole('button', { name: 'Set the password' }).click();
    expect(await page.locator('[data-field-error]').first().innerText()).toMatch(/12/);
    await page.getByLabel('New password', { exact: true }).fill(fresh);
    await page.getByLabel('New password again').fill(fresh);
    await page.getByRole('button', { name: 'Set the password' }).click();
    expect(await page.locator('[data-reset-done]').innerText()).toMatch(/password is changed/);
    await screenshot(page, '51-reset-done');

    // The old password no longer works …
    await page.goto('/sign-in');
    await page.getByLabel('E-mail').fill(email);
    await page.getByLabel('Password').fill(PASSWORD);
    await page.getByRole('button', { name: 'Sign in' }).click();
    await page.locator('[role="alert"]').waitFor();
    expect(await page.locator('[data-nav]').count()).toBe(0);

    // … the new one does.
    await signIn(page, email, fresh);
    expect(await page.locator('[data-role]').innerText()).toBe('Auditor');

    // The link worked once: opened again, it is refused in words.
    const { page: again } = await h.open();
    await again.goto(href!);
    await again.getByLabel('New password', { exact: true }).fill('yet another long passphrase');
    await again.getByLabel('New password again').fill('yet another long passphrase');
    await again.getByRole('button', { name: 'Set the password' }).click();
    await again.locator('[role="alert"]').waitFor();
    expect(await again.locator('[data-reset-done]').count()).toBe(0);
  });
});
