// Issue 16, the CSV reader in the browser: a file whose decimal separator is a comma is read as
// written or refused with a choice to make, never cut short at the comma. The files and what must
// come of them are the shared fixtures (tests/fixtures/csv/outcomes.json), which the shared reader,
// the console's unit test and POST /v1/lots also run; here the quality engineer's browser reads them.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import type { Page } from 'playwright-core';
import { beforeAll, describe, expect, it } from 'vitest';
import { issueApiKey } from '../../server/identity/api-key-store';
import { measurements } from '../support/lots';
import { pickProduct, screenshot, seedProduct, signIn, useHarness } from './support';

const h = useHarness('csv-decimal');
let apiKey: string;
const fixture = (name: string) => readFileSync(join(process.cwd(), 'tests', 'fixtures', 'csv', name));

beforeAll(async () => {
  await seedProduct(h, { tareMode: 'none', fixedTare: null, name: 'Rolled oats 500 g (csv decimal)' });
  apiKey = (await issueApiKey({ organisationId: h.organisationId, name: 'csv decimal test', scopes: ['verdicts:read'] })).secret;
});

async function openForm(page: Page, lotCode: string): Promise<void> {
  await signIn(page, h.users.quality);
  await page.goto('/lots/new');
  await pickProduct(page, 'csv decimal', /Rolled oats 500 g \(csv decimal\)/);
  await page.getByLabel('Lot code').fill(lotCode);
  await page.getByLabel('Lot size (packs)').fill('2400');
}

describe('a CSV with decimal commas, in the browser', () => {
  it('refuses the truncation trap (unquoted decimal commas in a comma-separated file) naming the line, never reading 2,498,5 as 498', async () => {
    const { page } = await h.open();
    await openForm(page, 'L-CSV-TRAP');
    await page.locator('[data-csv-input]').setInputFiles({ name: 'truncation-trap.csv', mimeType: 'text/csv', buffer: fixture('truncation-trap.csv') });
    // outcomes.json, "the truncation trap": refused at line 3, "this row has 3 fields", nothing to choose
    const problem = page.locator('[data-csv-problem]');
    await problem.waitFor();
    expect(await problem.innerText()).toContain('this row has 3 fields');
    expect(await problem.innerText()).toMatch(/line 3/i);
    expect(await page.locator('[data-csv-choose]').count()).toBe(0);
    expect(await page.locator('[data-preview-ready]').count()).toBe(0);
    expect(await page.locator('[data-send-lot]').isDisabled()).toBe(true);
  });

  it('asks which decimal separator a one-column file means, reads 498,5 as 498.5 once the comma is chosen, and seals the values as written', async () => {
    const { page } = await h.open();
    await openForm(page, 'L-CSV-COMMA');
    // outcomes.json, "one column of decimal commas, nothing chosen": refused at line 2, choose decimal=comma
    await page.locator('[data-csv-input]').setInputFiles({ name: 'one-column-commas.csv', mimeType: 'text/csv', buffer: fixture('one-column-commas.csv') });
    await page.locator('[data-csv-problem]').waitFor();
    expect(await page.locator('[data-csv-problem]').innerText()).toMatch(/line 2/i);
    await page.locator('[data-csv-choose="decimal=comma"]').waitFor();
    expect(await page.locator('[data-preview-ready]').count()).toBe(0);

    // A lot's worth of values in the same form: one column, decimal commas (values of the test's own generator).
    const values = measurements(77, 50, 503, 2);
    const csv = `net_g\n${values.map((v) => String(v).replace('.', ',')).join('\n')}\n`;
    await page.locator('[data-csv-input]').setInputFiles({ name: 'lot-commas.csv', mimeType: 'text/csv', buffer: Buffer.from(csv) });
    await page.locator('[data-csv-choose="decimal=comma"]').click();
    await page.locator('[data-csv-reading]').waitFor();
    expect(await page.locator('[data-csv-reading]').innerText()).toMatch(/comma/i);
    await page.locator('[data-preview-ready]').waitFor();
    expect(await page.locator('[data-preview-ready]').innerText()).toContain('50 values read');
    await screenshot(page, '88-csv-decimal-comma');

    await page.locator('[data-send-lot]').click();
    await page.waitForURL(/\/verdicts\/[0-9a-f-]{36}$/);
    const id = page.url().split('/').pop()!;
    const doc = await (await fetch(`${h.baseUrl}/v1/verdicts/${id}/export`, { headers: { Authorization: `Bearer ${apiKey}` } })).json();
    // every value as written in the file, the comma read as the decimal separator
    expect(doc.record.input.lot.measurements).toEqual(values);
  });
});
