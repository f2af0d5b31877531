// Browser-test support: the real app (tests/support/app.ts) on the test database, listening on a
// free port and serving the console built into dist/console by tests/run.ts; Debian's Chromium
// driven by playwright-core with a fresh, empty profile; screenshots into tests/artifacts/.
import { mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import type { AddressInfo } from 'node:net';
import { createServer } from 'node:http';
import { startTestSmtp } from '../support/identity';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { afterAll, afterEach, beforeAll } from 'vitest';
import { buildTestApp, createTestOrganisation, testConfig, type TestApp } from '../support/app';
import { createUser } from '../../server/identity/users';
import type { Principal, Role } from '../../server/core/principal';
import { createProduct, type ProductInput } from '../../server/products/products';

export const SCREENSHOTS = join(process.cwd(), 'tests', 'artifacts', 'screenshots');
export const PASSWORD = 'correct horse battery staple';

export interface Harness {
  baseUrl: string;
  testApp: TestApp;
  organisationId: string;
  users: Record<Role, string>;
  /** A fresh browser (new empty profile) for one role; closed by `close()`. */
  open: (opts?: { width?: number; height?: number }) => Promise<{ page: Page; context: BrowserContext }>;
  close: () => Promise<void>;
}

const CHROMIUM_ARGS = ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];

let lastPage: Page | null = null;

/** A screenshot of the page a failed test left behind (call from afterEach). */
export async function screenshotOnFailure(ctx: { task: { name: string; result?: { state?: string } } }): Promise<void> {
  if (ctx.task.result?.state === 'fail' && lastPage && !lastPage.isClosed()) {
    await screenshot(lastPage, `failed-${ctx.task.name.replace(/[^a-z0-9]+/gi, '-').slice(0, 60)}`).catch(() => undefined);
  }
}

/**
 * The harness of one browser test file: started before its tests (hooks registered after this
 * call run after the start, so they may seed data), closed after them, with a screenshot of the
 * page a failed test left behind. The object returned is filled in when the harness has started.
 */
export function useHarness(label: string): Harness {
  const h = {} as Harness;
  beforeAll(async () => {
    Object.assign(h, await startHarness(label));
  });
  afterEach(screenshotOnFailure);
  afterAll(async () => {
    await h.close?.();
  });
  return h;
}

export async function startHarness(label: string): Promise<Harness> {
  // The port first, so that links in e-mail (invitations, resets) point at this very server;
  // e-mail goes to the local SMTP fake, whose catch the development mailbox shows.
  const server = createServer();
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', () => resolve()));
  const baseUrl = `http://127.0.0.1:${(server.address() as AddressInfo).port}`;
  const smtp = await startTestSmtp();
  const testApp = buildTestApp({ smtp: { ...testConfig().smtp, host: smtp.host, port: smtp.port }, publicUrl: baseUrl });
  server.on('request', testApp.app);
  const org = await createTestOrganisation(`Browser ${label} packer`);
  const users = {} as Record<Role, string>;
  for (const role of ['admin', 'quality', 'auditor'] as const) {
    const email = `${role}.${org.slug}@example.test`;
    await createUser({ organisationId: org.id, email, role, password: PASSWORD, name: `${role} tester` });
    users[role] = email;
  }
  const contexts: BrowserContext[] = [];
  const profiles: string[] = [];
  mkdirSync(SCREENSHOTS, { recursive: true });

  return {
    baseUrl,
    testApp,
    organisationId: org.id,
    users,
    async open(opts = {}) {
      const dir = mkdtempSync(join(tmpdir(), 'lotproof-chromium-'));
      profiles.push(dir);
      const context = await chromium.launchPersistentContext(dir, {
        executablePath: '/usr/bin/chromium',
        headless: true,
        args: CHROMIUM_ARGS,
        viewport: { width: opts.width ?? 1280, height: opts.height ?? 900 },
        acceptDownloads: true,
        baseURL: baseUrl,
      });
      contexts.push(context);
      const page = context.pages()[0] ?? (await context.newPage());
      lastPage = page;
      page.setDefaultTimeout(15_000);
      // Uncaught errors in the console surface in the test output.
      page.on('pageerror', (err) => console.error(`[browser] ${err.message}`));
      page.on('console', (msg) => {
        if (msg.type() === 'error') console.error(`[browser console] ${msg.text()}`);
      });
      return { page, context };
    },
    async close() {
      for (const c of contexts) await c.close().catch(() => undefined);
      for (const d of profiles) rmSync(d, { recursive: true, force: true });
      server.closeAllConnections();
      await new Promise<void>((resolve) => server.close(() => resolve()));
      await smtp.stop();
      await testApp.close();
    },
  };
}

export async function signIn(page: Page, email: string, password = PASSWORD): Promise<void> {
  await page.goto('/sign-in');
  await page.getByLabel('E-mail').fill(email);
  await page.getByLabel('Password').fill(password);
  await page.getByRole('button', { name: 'Sign in' }).click();
  await page.locator('[data-nav]').waitFor();
}

export async function screenshot(page: Page, name: string): Promise<void> {
  await page.screenshot({ path: join(SCREENSHOTS, `${name}.png`), fullPage: true });
}

/** Names of the navigation items the page shows, in order. */
export async function navigationNames(page: Page): Promise<string[]> {
  return page.locator('[data-nav-item]').evaluateAll((els) => els.map((e) => e.getAttribute('data-nav-item') ?? ''));
}

/** A product of the harness's organisation, created through the service the API uses. */
export async function seedProduct(h: Harness, input: Partial<ProductInput> = {}): Promise<{ id: string; sku: string; name: string }> {
  const principal: Principal = { organisationId: h.organisationId, kind: 'session', scopes: [], roles: ['quality'] };
  const sku = input.sku ?? `BRW-${Math.random().toString(36).slice(2, 8).toUpperCase()}`;
  return createProduct(principal, {
    sku,
    name: input.name ?? `Rolled oats 500 g (${sku})`,
    nominalQuantity: 500,
    unit: 'g',
    tareMode: 'fixed',
    fixedTare: 14,
    rulebook: { id: 'eu-76-211' },
    ...input,
  });
}

/**
 * Gross weights of an invented lot (a seeded linear congruential generator, Park & Miller 1988,
 * "Random number generators: good ones are hard to find", CACM 31:1192): net around `mean` g
 * plus the 14 g tare, as a CSV with a header, in production order.
 */
export function demoCsv(n = 60, mean = 503, seed = 20240611): string {
  let state = seed;
  const uniform = () => (state = (state * 48271) % 2147483647) / 2147483647;
  const rows = ['pack,gross_g,operator'];
  for (let i = 0; i < n; i++) {
    // Sum of four uniforms: a bell-shaped spread of about ±3 g.
    const noise = (uniform() + uniform() + uniform() + uniform() - 2) * 2.6;
    rows.push(`${i + 1},${(mean + 14 + noise).toFixed(1)},demo`);
  }
  return `${rows.join('\n')}\n`;
}

/**
 * On the lot form: type part of a product's name into the picker, wait for the option, take it with
 * Enter (the keyboard path: the first match is active), and wait for the product's spec to show.
 */
export async function pickProduct(page: Page, typed: string, option: RegExp): Promise<void> {
  const picker = page.locator('[data-product-picker]');
  await picker.waitFor();
  await page.waitForLoadState('networkidle');
  // On a loaded machine the products may arrive after the typing has closed the list: type again.
  for (let attempt = 1; ; attempt++) {
    await picker.fill('');
    await picker.pressSequentially(typed);
    try {
      await page.getByRole('option', { name: option }).waitFor({ timeout: 8_000 });
      break;
    } catch (err) {
      if (attempt === 3) throw err;
    }
  }
  await picker.press('Enter');
  await page.locator('[data-product-spec]').waitFor();
}
