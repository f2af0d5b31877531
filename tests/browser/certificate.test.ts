// Issue 16, "Certificate": the verdict page offers the verdict's certificate (a PDF); it downloads
// in the browser, and its first page, rendered to PNG with Debian's poppler-utils (pdftoppm), is
// kept as a test artifact beside the screenshots (tests/artifacts/screenshots/).
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { issueApiKey } from '../../server/identity/api-key-store';
import { measurements } from '../support/lots';
import { SCREENSHOTS, seedProduct, signIn, useHarness } from './support';

const h = useHarness('certificate');
let verdict: { id: string; seal: string };

beforeAll(async () => {
  const product = await seedProduct(h, { tareMode: 'none', fixedTare: null, name: 'Rolled oats 500 g (certificate)' });
  const { secret } = await issueApiKey({ organisationId: h.organisationId, name: 'certificate test', scopes: ['lots:submit', 'audit:read'] });
  const auth = { Authorization: `Bearer ${secret}`, 'Content-Type': 'application/json' };
  const res = await fetch(`${h.baseUrl}/v1/lots`, {
    method: 'POST',
    headers: auth,
    body: JSON.stringify({
      sku: product.sku, lotCode: 'L-CERT-1', line: 'Line 2 (demo)', packedAt: '2026-11-30T05:40:00Z', lotSize: 3000,
      testing: 'non-destructive', measurementUnit: 'g', measurementBasis: 'net', measurements: measurements(51, 50, 503.4, 2.1),
    }),
  });
  const body = await res.json();
  if (res.status !== 201) throw new Error(`lot: ${res.status} ${JSON.stringify(body)}`);
  verdict = { id: body.id, seal: body.seal.value };
  // a checkpoint that covers it, so the certificate names the checkpoint it is proven in
  const cp = await fetch(`${h.baseUrl}/v1/ledger/checkpoints`, { method: 'POST', headers: auth });
  if (cp.status !== 201) throw new Error(`checkpoint: ${cp.status}`);
});

describe('the certificate of a verdict', () => {
  it('downloads from the verdict page as a PDF, and its first page is kept as a PNG', async () => {
    const { page } = await h.open();
    await signIn(page, h.users.quality);
    await page.goto(`/verdicts/${verdict.id}`);
    const button = page.locator('[data-certificate]');
    await button.waitFor();
    expect(await button.innerText()).toBe('Certificate (PDF)');
    const [download] = await Promise.all([page.waitForEvent('download'), button.click()]);
    expect(download.suggestedFilename()).toBe(`lotproof-certificate-L-CERT-1-${verdict.seal.slice(0, 10)}.pdf`);
    const pdfPath = join(SCREENSHOTS, '70-certificate.pdf');
    await download.saveAs(pdfPath);
    // ISO 32000-1 §7.5.2: the file begins with "%PDF-"
    expect(readFileSync(pdfPath).subarray(0, 5).toString('latin1')).toBe('%PDF-');

    // The first page at 72 dpi: A4 is 595.28 × 841.89 pt (ISO 216: 210 × 297 mm), so 596 × 842 pixels (pdftoppm rounds up).
    const prefix = join(SCREENSHOTS, '70-certificate-page');
    execFileSync('pdftoppm', ['-png', '-r', '72', '-f', '1', '-l', '1', '-singlefile', pdfPath, prefix]);
    const png = `${prefix}.png`;
    expect(existsSync(png)).toBe(true);
    const bytes = readFileSync(png);
    // PNG signature and IHDR (RFC 2083 §3.1, §4.1.1): width and height are the 4-byte integers at offsets 16 and 20
    expect(bytes.subarray(1, 4).toString('latin1')).toBe('PNG');
    expect([bytes.readUInt32BE(16), bytes.readUInt32BE(20)]).toEqual([596, 842]);
    expect(statSync(png).size).toBeGreaterThan(20_000); // a drawn page, not a blank one

    // Its text holds what the page shows: the decision sentence and the seal.
    const text = execFileSync('pdftotext', ['-enc', 'UTF-8', pdfPath, '-'], { encoding: 'utf8' }).replace(/\s+/g, '');
    const sentence = (await page.locator('[data-decision-sentences] li').first().innerText()).replace(/\s+/g, '');
    expect(text).toContain(sentence);
    expect(text).toContain(verdict.seal);
  });
});
