// The API docs page in Lotproof's own look: our name, colours and the Inter font served from this
// server, the stock tool's top bar hidden, and nothing the page or its start script loads or links
// from another host (URLs found by the WHATWG URL parser, resolved against the page's own address).
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, type TestApp } from '../support/app';

let t: TestApp;
beforeAll(() => {
  t = buildTestApp();
});
afterAll(() => t.close());

const ORIGIN = 'http://docs.test';

/** Every URL an HTML or script text refers to (attributes, url(...), quoted absolute URLs), resolved against the page. */
function referencedUrls(text: string, base: string): URL[] {
  const raw = [
    ...[...text.matchAll(/\b(?:src|href|action)\s*=\s*["']([^"']+)["']/gi)].map((m) => m[1]!),
    ...[...text.matchAll(/url\(\s*["']?([^"')]+)["']?\s*\)/gi)].map((m) => m[1]!),
    ...[...text.matchAll(/["'`]((?:https?:)?\/\/[^"'`\s]+)["'`]/gi)].map((m) => m[1]!),
  ];
  return raw.filter((u) => !u.startsWith('data:') && !u.startsWith('#')).map((u) => new URL(u, base));
}

describe('the API docs page', () => {
  it('carries Lotproof’s name, colours and favicon, and hides the stock top bar', async () => {
    const page = await request(t.app).get('/docs/');
    expect(page.status).toBe(200);
    expect(page.text).toMatch(/<title>Lotproof API<\/title>/);
    expect(page.text).toContain('#1f5d63'); // --color-brand of console/src/assets/main.css
    expect(page.text).toMatch(/\.swagger-ui \.topbar\s*\{[^}]*display:\s*none/);
    expect(page.text).toMatch(/<link rel="icon" href="\/docs-assets\/favicon\.svg"/);
    const icon = await request(t.app).get('/docs-assets/favicon.svg');
    expect(icon.status).toBe(200);
    expect(icon.headers['content-type']).toMatch(/^image\/svg\+xml/);
  });

  it('serves the Inter font it names from this server, as WOFF2 (W3C WOFF 2.0 §3: signature "wOF2")', async () => {
    const page = await request(t.app).get('/docs/');
    const fonts = referencedUrls(page.text, `${ORIGIN}/docs/`).filter((u) => /\.woff2$/.test(u.pathname));
    expect(fonts.length).toBeGreaterThanOrEqual(2);
    expect(page.text).toMatch(/font-family:\s*["']?Inter/);
    for (const f of fonts) {
      const res = await request(t.app).get(f.pathname).buffer(true).parse((r, cb) => {
        const chunks: Buffer[] = [];
        r.on('data', (c: Buffer) => chunks.push(c));
        r.on('end', () => cb(null, Buffer.concat(chunks)));
      });
      expect(res.status, f.pathname).toBe(200);
      expect((res.body as Buffer).subarray(0, 4).toString('latin1')).toBe('wOF2');
    }
  });

  it('refers to no other host, in the page or in its start script, and turns off the online validator', async () => {
    const page = await request(t.app).get('/docs/');
    const init = await request(t.app).get('/docs/swagger-ui-init.js');
    expect(init.status).toBe(200);
    // XML namespace names identify vocabularies and are never fetched (Namespaces in XML 1.0 §2.2).
    const pageText = page.text.replace(/xmlns(:\w+)?="[^"]*"/g, '');
    const options = JSON.parse(/var options = (\{[\s\S]*\});?\s*\n\s*url = options\.swaggerUrl/.exec(init.text)![1]!) as Record<string, unknown>;
    const { swaggerDoc, ...rest } = options;
    expect(rest.customOptions).toMatchObject({ validatorUrl: null }); // swagger-ui-express passes swaggerOptions on as customOptions
    const outside = [...referencedUrls(pageText, `${ORIGIN}/docs/`), ...referencedUrls(JSON.stringify(rest), `${ORIGIN}/docs/`)].filter((u) => u.origin !== ORIGIN);
    expect(outside.map(String)).toEqual([]);
    // The document itself only names hosts of its examples, under the reserved .example TLD (RFC 2606 §2),
    // and the problem types of RFC 9457 §3.1.1 under our own name.
    const inDoc = referencedUrls(JSON.stringify(swaggerDoc), `${ORIGIN}/docs/`).filter((u) => u.origin !== ORIGIN);
    for (const u of inDoc) expect(u.hostname, String(u)).toMatch(/(\.example|^lotproof\.dev)$/);
  });
});
