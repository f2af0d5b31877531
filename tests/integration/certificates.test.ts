// Issue 16, "Certificate": GET /v1/verdicts/{id}/certificate is a PDF of the verdict for a customer
// or an inspector. Its text, read back with Debian's poppler-utils (`pdftotext`, `pdffonts`), holds
// the decision, the criteria, the figures at the verdict's precision, the caution, the seal, its
// signature and key, the checkpoint it is proven in, and re-test marks; its fonts are embedded.
// Reading one is reading the verdict: same scopes, same organisation.
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createProduct, lotBody, measurements } from '../support/lots';

let t: TestApp;
let key: string;
let otherKey: string;
let product: { id: string; sku: string };
const dir = mkdtempSync(join(tmpdir(), 'lotproof-certificates-'));

beforeAll(async () => {
  t = buildTestApp({ publicUrl: 'https://lotproof.example.test' });
  const org = await createTestOrganisation('Certificate packer (test)');
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  const other = await createTestOrganisation('Other packer (test)');
  otherKey = await createTestKey(other.id, ['verdicts:read', 'audit:read']);
  product = await createProduct(t.app, key, { sku: 'T-CERT-500' });
});
afterAll(async () => {
  await t.close();
  rmSync(dir, { recursive: true, force: true });
});

const auth = (k = key) => ({ Authorization: `Bearer ${k}` });
const post = (body: object) => request(t.app).post('/v1/lots').set(auth()).send(body);
const certificate = (id: string, k = key) =>
  request(t.app)
    .get(`/v1/verdicts/${id}/certificate`)
    .set(auth(k))
    .buffer(true)
    .parse((res, cb) => {
      const chunks: Buffer[] = [];
      res.on('data', (c: Buffer) => chunks.push(c));
      res.on('end', () => cb(null, Buffer.concat(chunks)));
    });

/**
 * The PDF's text as poppler's pdftotext reads it: `text` in reading order, `layout` with each line
 * as laid out (a label and its value on one line: pdftotext -layout), `flat` the text without white
 * space (a sentence wrapped over lines); its fonts as pdffonts lists them.
 */
function readPdf(pdf: Buffer, name: string): { text: string; layout: string; flat: string; fonts: string; pages: number } {
  const file = join(dir, `${name}.pdf`);
  writeFileSync(file, pdf);
  const text = execFileSync('pdftotext', ['-enc', 'UTF-8', file, '-'], { encoding: 'utf8' });
  const layout = execFileSync('pdftotext', ['-layout', '-enc', 'UTF-8', file, '-'], { encoding: 'utf8' });
  const fonts = execFileSync('pdffonts', [file], { encoding: 'utf8' });
  const info = execFileSync('pdfinfo', [file], { encoding: 'utf8' });
  return { text, layout, flat: text.replace(/\s+/g, ''), fonts, pages: Number(/Pages:\s+(\d+)/.exec(info)?.[1]) };
}

describe('the certificate of a conforming lot', () => {
  let lot: request.Response;
  let pdf: ReturnType<typeof readPdf>;
  beforeAll(async () => {
    lot = await post({ ...lotBody(product.sku, 901), lotCode: 'CERT-901', line: 'Line 3 (test)', lotSize: 2400 });
    expect(lot.status, JSON.stringify(lot.body)).toBe(201);
    // a checkpoint of the ledger that covers the verdict (POST /v1/ledger/checkpoints)
    const cp = await request(t.app).post('/v1/ledger/checkpoints').set(auth());
    expect(cp.status, JSON.stringify(cp.body)).toBe(201);
    const res = await certificate(lot.body.id);
    expect(res.status, String(res.body).slice(0, 300)).toBe(200);
    expect(res.headers['content-type']).toBe('application/pdf');
    expect(res.headers['content-disposition']).toBe(`attachment; filename="lotproof-certificate-CERT-901-${lot.body.seal.value.slice(0, 10)}.pdf"`);
    // ISO 32000-1 §7.5.2: a PDF file begins with the header "%PDF-" and its version
    expect((res.body as Buffer).subarray(0, 5).toString('latin1')).toBe('%PDF-');
    pdf = readPdf(res.body as Buffer, 'conforming');
  });

  it('opens with the release decision, and holds the caution', () => {
    expect(lot.body.decision).toBe('conforming');
    // the sentence of console/src/lib/releaseDecision.ts for a conforming verdict
    expect(pdf.flat).toContain(`Release: the lot meets every criterion of ${lot.body.result.rulebook.title}.`.replace(/\s+/g, ''));
    expect(pdf.text).toContain('Conforming');
    expect(pdf.flat).toContain('supportsareleasedecisionbythepacker’sresponsibleperson'.replace(/\s+/g, ''));
    expect(pdf.flat).toContain('competentauthorityprevail');
  });

  it('lists every criterion with its mark and its clause', () => {
    for (const c of lot.body.result.criteria as Array<{ passed: boolean | null }>) expect(c.passed).toBe(true);
    expect((pdf.text.match(/\bMet\b/g) ?? []).length).toBeGreaterThanOrEqual(lot.body.result.criteria.length);
    // Directive 76/211/EEC Annex II 2.2.1 is the clause of the T1 criterion in a first sample (the engine's sentence names it)
    expect(pdf.text).toContain('Annex II 2.2.1');
    expect(pdf.flat).toContain('Rulebooksource:'.replace(/\s+/g, ''));
  });

  it('gives the figures at the verdict’s precision: TNE 15 g → steps of 0.1 g (format.ts quantityDecimals), declared figures with their own digits', () => {
    const r = lot.body.result;
    // the stored TNE for Qn 500 g (Directive 76/211/EEC Annex I 2.4: 500 to 1 000 g → 15 g)
    expect(r.net.tolerableNegativeError).toBe(15);
    const mean = (r.statistics.descriptive.mean as number).toFixed(1);
    const sd = (r.statistics.descriptive.standardDeviation as number).toFixed(1);
    expect(pdf.layout).toMatch(new RegExp(`Mean\\s+${mean.replace('.', '\\.')} g`));
    expect(pdf.layout).toMatch(new RegExp(`Standard deviation\\s+${sd.replace('.', '\\.')} g`));
    expect(pdf.layout).toMatch(/Nominal quantity Qn\s+500 g/);
    expect(pdf.layout).toMatch(/TNE\s+15 g/);
    expect(pdf.layout).toMatch(/Packs judged\s+50\b/);
    expect(pdf.layout).toMatch(/Lot size\s+2,400 packs/);
    // no figure with more digits than the step: the mean as stored has three decimals (502.9xx)
    expect(pdf.text).not.toContain(String(r.statistics.descriptive.mean));
  });

  it('holds the seal, its signature, the key id and the checkpoint it is proven in', () => {
    const seal = lot.body.seal;
    expect(pdf.flat).toContain(seal.value);
    expect(pdf.flat).toContain(seal.signature);
    expect(pdf.flat).toContain(seal.kid);
    expect(pdf.layout).toMatch(new RegExp(`Seal \\(SHA-256, RFC 8785\\)\\s+${seal.value}`));
    expect(pdf.layout).toMatch(new RegExp(`Signature \\(Ed25519\\)\\s+${seal.signature.replace(/-/g, '\\-')}`));
    expect(pdf.flat).toContain('treesize1,');
    expect(pdf.flat).toContain('inclusionproofof0hashescheckedagainsttheroot');
    // the QR code's target is written out too
    expect(pdf.flat).toContain(`https://lotproof.example.test/verify/${seal.value}`);
  });

  it('embeds its fonts (Inter, subset) and fits on at most two A4 pages', () => {
    const rows = pdf.fonts.split('\n').filter((l) => /Inter/.test(l));
    expect(rows.length).toBeGreaterThanOrEqual(2);
    for (const r of rows) expect(r).toMatch(/\byes\s+yes\b/); // pdffonts columns "emb sub"
    expect(pdf.pages).toBeGreaterThanOrEqual(1);
    expect(pdf.pages).toBeLessThanOrEqual(2);
  });
});

describe('certificates of a re-test and its original', () => {
  it('mark the re-test and the verdict it re-tests, with the reason', async () => {
    const original = await post({ ...lotBody(product.sku, 911), lotCode: 'CERT-911', measurements: measurements(911, 50, 470, 2) });
    expect(original.body.decision).toBe('nonconforming');
    const reason = 'Scale 2 read 30 g low after a knock; re-weighed on a checked scale (demo)';
    const retest = await post({ ...lotBody(product.sku, 912), lotCode: 'CERT-911', retest: { of: original.body.id, reason } });
    expect(retest.status, JSON.stringify(retest.body)).toBe(201);

    const first = readPdf((await certificate(original.body.id)).body as Buffer, 'original');
    expect(first.text).toMatch(/^Hold: /m);
    expect(first.flat).toContain(`Re-testedbyverdict${retest.body.id}`);
    expect(first.flat).toContain(reason.replace(/\s+/g, ''));
    // sealed after the latest checkpoint: the certificate says so rather than claim a proof
    expect(first.layout).toMatch(/Proven in checkpoint\s+not yet:/);

    const second = readPdf((await certificate(retest.body.id)).body as Buffer, 'retest');
    expect(second.flat).toContain(`Re-testofverdict${original.body.id}`);
    expect(second.flat).toContain(reason.replace(/\s+/g, ''));
  });
});

describe('who may read a certificate', () => {
  it("is another organisation's 404, and an unknown verdict's 404, never a PDF", async () => {
    const lot = await post({ ...lotBody(product.sku, 921), lotCode: 'CERT-921' });
    const res = await request(t.app).get(`/v1/verdicts/${lot.body.id}/certificate`).set(auth(otherKey));
    expect(res.status).toBe(404);
    expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
    expect((await request(t.app).get('/v1/verdicts/00000000-0000-4000-8000-000000000000/certificate').set(auth())).status).toBe(404);
  });

  it('needs a verdict-reading scope: a key that may only submit lots gets a 403', async () => {
    const submitOnly = await createTestKey((await createTestOrganisation('Submit-only packer (test)')).id, ['lots:submit']);
    const res = await request(t.app).get('/v1/verdicts/00000000-0000-4000-8000-000000000000/certificate').set(auth(submitOnly));
    expect(res.status).toBe(403);
  });
});
