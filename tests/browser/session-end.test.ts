// A console session that ends while a page is open (here: unused for longer than the idle
// timeout) sends the page to sign-in, which says why, and signing in again returns to the page.
import { describe, expect, it } from 'vitest';
import { Session, User } from '../../server/models';
import { PASSWORD, screenshot, signIn, useHarness } from './support';

const h = useHarness('session-end');

describe('a session that ends while the console is open', () => {
  it('goes to sign-in with a note, and back to the page after signing in again', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.quality);
    await page.goto('/verdicts');
    await page.locator('[data-nav]').waitFor();
    // Let the verdicts page finish its own requests first: one still in flight when the session
    // ends would send the page to sign-in before the click below (and back to /verdicts after).
    await page.waitForLoadState('networkidle');
    // 31 minutes without a request (the idle timeout is 30)
    const user = await User.findOne({ where: { email: h.users.quality } });
    await Session.update({ lastSeenAt: new Date(Date.now() - 31 * 60_000) }, { where: { userId: user!.id } });
    await page.locator('[data-nav]').getByRole('link', { name: /Products/ }).click();
    await page.locator('[data-session-ended]').waitFor();
    expect(new URL(page.url()).pathname).toBe('/sign-in');
    expect(await page.locator('[data-session-ended]').innerText()).toMatch(/session has ended/);
    await screenshot(page, '14-session-ended');
    await page.getByLabel('E-mail').fill(h.users.quality);
    await page.getByLabel('Password').fill(PASSWORD);
    await page.getByRole('button', { name: 'Sign in' }).click();
    await page.waitForURL((u) => u.pathname === '/products');
  });
});
