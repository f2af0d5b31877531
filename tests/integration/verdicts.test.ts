// The verdict API: products, lots in (JSON and CSV), sealed verdicts out, reading, idempotency,
// bad lots as problem details, tenant isolation.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Sequelize } from 'sequelize';
import { buildTestApp, createTestKey, createTestOrganisation, testOwnerUrl, type TestApp } from '../support/app';
import { createProduct, lotBody, measurements } from '../support/lots';

let t: TestApp;
let key: string;
let orgId: string;
let product: { id: string; sku: string };

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Verdict test packer');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  product = await createProduct(t.app, key);
});
afterAll(() => t.close());

const auth = () => ({ Authorization: `Bearer ${key}` });

describe('submitting a lot', () => {
  it('returns 201 with a sealed verdict that carries the caution, found again by id and by seal', async () => {
    const res = await request(t.app).post('/v1/lots').set(auth()).send(lotBody(product.sku, 1));
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const v = res.body;
    expect(v.decision).toBe('conforming');
    expect(v.seal.value).toMatch(/^[0-9a-f]{64}$/);
    expect(v.seal.signatureAlgorithm).toBe('Ed25519');
    expect(v.caution).toMatch(/responsible person/);
    expect(v.caution).toMatch(/competent authority/);
    expect(res.headers.location).toBe(`/v1/verdicts/${v.id}`);

    const byId = await request(t.app).get(`/v1/verdicts/${v.id}`).set(auth());
    expect(byId.status).toBe(200);
    expect(byId.body.seal).toEqual(v.seal);
    expect(byId.body.result).toEqual(v.result);

    const bySeal = await request(t.app).get(`/v1/seals/${v.seal.value}`).set(auth());
    expect(bySeal.status).toBe(200);
    expect(bySeal.body.verdict.id).toBe(v.id);
    expect(bySeal.body.document.record.input.lot.measurements).toEqual(lotBody(product.sku, 1).measurements);
    expect(bySeal.body.document.seal).toBe(v.seal.value);
  });
});

async function verdictCount(): Promise<number> {
  const [rows] = await t.ctx.db.sequelize.query('SELECT count(*)::int AS n FROM verdicts WHERE organisation_id = $1', { bind: [orgId] });
  return (rows as { n: number }[])[0]!.n;
}

function expectProblem(res: request.Response, status: number, pointer?: string | RegExp) {
  expect(res.status, JSON.stringify(res.body)).toBe(status);
  expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
  if (pointer !== undefined) {
    const pointers = (res.body.errors ?? []).map((e: { pointer: string }) => e.pointer);
    expect(pointers.some((p: string) => (typeof pointer === 'string' ? p === pointer : pointer.test(p))), JSON.stringify(res.body)).toBe(true);
  }
}

/** GET /v1/verdicts/{id}/export as text (the sealed document, byte for byte). */
function exportOf(id: string) {
  return request(t.app).get(`/v1/verdicts/${id}/export`).set(auth()).buffer(true).parse((res, cb) => {
    let s = '';
    res.on('data', (c: Buffer) => (s += c.toString('utf8')));
    res.on('end', () => cb(null, s));
  });
}

describe('the offline verifier', () => {
  it('accepts an exported verdict and rejects it after any one byte is changed', async () => {
    const { execFileSync, spawnSync } = await import('node:child_process');
    const { mkdtempSync, rmSync, writeFileSync } = await import('node:fs');
    const { join } = await import('node:path');
    const { tmpdir } = await import('node:os');
    const created = await request(t.app).post('/v1/lots').set(auth()).send(lotBody(product.sku, 2));
    expect(created.status).toBe(201);
    const exp = await exportOf(created.body.id);
    expect(exp.status).toBe(200);
    const text = exp.body as string;
    const jwks = await request(t.app).get('/.well-known/jwks.json');
    expect(jwks.body.keys[0]).toMatchObject({ kty: 'OKP', crv: 'Ed25519' });
    const dir = mkdtempSync(join(tmpdir(), 'lotproof-verify-'));
    writeFileSync(join(dir, 'jwks.json'), JSON.stringify(jwks.body));
    const verifier = join(process.cwd(), 'clients', 'verifier', 'verify.mjs');
    writeFileSync(join(dir, 'doc.json'), text);
    const ok = execFileSync(process.execPath, [verifier, '--jwks', join(dir, 'jwks.json'), join(dir, 'doc.json')], { encoding: 'utf8' });
    expect(ok).toMatch(/all 1 sealed verdict\(s\) verified/);

    // Every region of the document: format, kid, the record's fields and measurements, seal, signature.
    const bytes = Buffer.from(text, 'utf8');
    const positions = new Set<number>([0, 1, bytes.length - 1, bytes.length - 2]);
    for (let i = 0; i < 30; i++) positions.add(Math.floor(((i + 0.5) / 30) * bytes.length));
    for (const marker of ['"decision":"', '"measurements":[', '"seal":"', '"signature":"', '"kid":"', '"previousSeal":', '"sequence":']) {
      const at = text.lastIndexOf(marker);
      positions.add(at + marker.length);
      positions.add(at + marker.length + 1);
    }
    positions.add(text.indexOf('"signature":"') + '"signature":"'.length + 85); // the last base64url character
    for (const pos of positions) {
      for (const delta of [1, 2]) {
        const copy = Buffer.from(bytes);
        copy[pos] = (copy[pos]! + delta) % 256;
        writeFileSync(join(dir, 'bad.json'), copy);
        const r = spawnSync(process.execPath, [verifier, '--jwks', join(dir, 'jwks.json'), join(dir, 'bad.json')], { encoding: 'utf8' });
        expect(r.status, `byte ${pos} +${delta} was accepted`).not.toBe(0);
      }
    }
    rmSync(dir, { recursive: true, force: true });
  }, 120_000);
});

describe('a big lot', () => {
  it('is sealed with its numbers in RFC 8785 form: the offline verifier accepts it, recompute agrees', async () => {
    const { execFileSync } = await import('node:child_process');
    const { mkdtempSync, rmSync, writeFileSync } = await import('node:fs');
    const { join } = await import('node:path');
    const { tmpdir } = await import('node:os');

    const values = measurements(77, 62_345, 503, 2);
    values[5] = 499; // an integer, as a checkweigher may send one
    const created = await request(t.app).post('/v1/lots').set(auth()).send(lotBody(product.sku, 77, { lotSize: 200_000, measurements: values }));
    expect(created.status).toBe(201);
    expect(created.body.lot.measurementCount).toBe(values.length);

    const exp = await exportOf(created.body.id);
    expect(exp.status).toBe(200);
    const text = exp.body as string;
    // the measurements in the record are the RFC 8785 text of what was sent
    expect(text).toContain(`"measurements":${JSON.stringify(values)}`);
    const dir = mkdtempSync(join(tmpdir(), 'lotproof-verify-big-'));
    const jwks = await request(t.app).get('/.well-known/jwks.json');
    writeFileSync(join(dir, 'jwks.json'), JSON.stringify(jwks.body));
    writeFileSync(join(dir, 'doc.json'), text);
    const verifier = join(process.cwd(), 'clients', 'verifier', 'verify.mjs');
    const ok = execFileSync(process.execPath, [verifier, '--jwks', join(dir, 'jwks.json'), join(dir, 'doc.json')], { encoding: 'utf8' });
    expect(ok).toMatch(/all 1 sealed verdict\(s\) verified/);
    rmSync(dir, { recursive: true, force: true });

    const re = await request(t.app).post(`/v1/verdicts/${created.body.id}/recompute`).set(auth());
    expect(re.status).toBe(200);
    expect(re.body.matches).toBe(true);
    const chain = await request(t.app).get('/v1/ledger/verify').set(auth());
    expect(chain.body.intact).toBe(true);
  }, 120_000);
});

describe('CSV lots', () => {
  const q = (extra = '') => `/v1/lots?sku=${product.sku}&lotCode=L-CSV-1&lotSize=2000&testing=non-destructive&measurementUnit=g&measurementBasis=net&column=net_g${extra}`;
  const csv = (values: (number | string)[]) => 'pack,net_g\n' + values.map((v, i) => `${i + 1},${v}`).join('\n') + '\n';

  it('judges a text/csv body by the named column', async () => {
    const values = measurements(11, 50, 503, 2);
    const res = await request(t.app).post(q()).set(auth()).set('Content-Type', 'text/csv').send(csv(values));
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    expect(res.body.lot.sourceFormat).toBe('csv');
    expect(res.body.lot.measurementCount).toBe(50);
  });

  it('names the CSV line of a non-numeric value, a negative value, and a malformed line; stores nothing', async () => {
    const before = await verdictCount();
    const values: (number | string)[] = measurements(12, 50, 503, 2);
    values[6] = 'abc';
    let res = await request(t.app).post(q()).set(auth()).set('Content-Type', 'text/csv').send(csv(values));
    expectProblem(res, 400, '/body');
    expect(res.body.detail).toMatch(/CSV line 8/);
    values[6] = -3;
    res = await request(t.app).post(q()).set(auth()).set('Content-Type', 'text/csv').send(csv(values));
    expectProblem(res, 400);
    expect(res.body.detail).toMatch(/CSV line 8.*negative/);
    const malformed = 'pack,net_g\n1,500.1\n2,"501.2\n3,499.9\n';
    res = await request(t.app).post(q()).set(auth()).set('Content-Type', 'text/csv').send(malformed);
    expectProblem(res, 400);
    expect(res.body.detail).toMatch(/CSV line \d+/);
    const extraField = 'pack,net_g\n1,500.1\n2,501.2,7\n3,499.9\n';
    res = await request(t.app).post(q()).set(auth()).set('Content-Type', 'text/csv').send(extraField);
    expectProblem(res, 400);
    expect(res.body.detail).toMatch(/CSV line 3/);
    res = await request(t.app).post(q().replace('column=net_g', 'column=gross')).set(auth()).set('Content-Type', 'text/csv').send(csv([1, 2]));
    expectProblem(res, 400, '/query/column');
    expect(await verdictCount()).toBe(before);
  });
});

describe('bad lots are 4xx problems naming the field; nothing is stored', () => {
  it('refuses each kind of bad lot', async () => {
    const before = await verdictCount();
    const base = lotBody(product.sku, 20);
    const m = base.measurements as number[];
    const cases: [string, unknown, number, string | RegExp][] = [
      ['non-numeric value', { ...base, measurements: [...m.slice(0, 3), 'abc', ...m.slice(4)] }, 400, '/body/measurements/3'],
      ['negative value', { ...base, measurements: [...m.slice(0, 17), -1, ...m.slice(18)] }, 400, '/body/measurements/17'],
      ['NaN as a string', { ...base, measurements: [...m.slice(0, 5), 'NaN', ...m.slice(6)] }, 400, '/body/measurements/5'],
      ['null value', { ...base, measurements: [...m.slice(0, 2), null, ...m.slice(3)] }, 400, '/body/measurements/2'],
      ['empty list', { ...base, measurements: [] }, 422, '/body/measurements'],
      ['unknown product', { ...base, sku: 'NO-SUCH-SKU' }, 422, '/body/sku'],
      ['unknown product id', { ...base, sku: undefined, productId: '00000000-0000-4000-8000-000000000000' }, 422, '/body/productId'],
      ['unit mismatch', { ...base, measurementUnit: 'mL' }, 422, '/body/measurementUnit'],
      ['lot size below sample size', { ...base, lotSize: 10 }, 422, '/body/lotSize'],
      ['missing lot code', { ...base, lotCode: undefined }, 400, '/body/lotCode'],
      ['unknown field', { ...base, colour: 'blue' }, 400, /colour|\/body/],
    ];
    for (const [name, body, status, pointer] of cases) {
      const res = await request(t.app).post('/v1/lots').set(auth()).send(body as object);
      expect(res.status, `${name}: ${JSON.stringify(res.body)}`).toBeLessThan(500);
      expectProblem(res, status, pointer);
    }
    const nan = await request(t.app).post('/v1/lots').set(auth()).set('Content-Type', 'application/json').send('{"sku":"x","measurementUnit":"g","measurements":[1,NaN]}');
    expectProblem(nan, 400);
    expect(await verdictCount()).toBe(before);
  });

  it('an archived product takes no new lot, by id or by SKU (reads answer 404 for it too)', async () => {
    const gone = await createProduct(t.app, key, { sku: 'ARCHIVED-OATS' });
    expect((await request(t.app).delete(`/v1/products/${gone.id}`).set(auth())).status).toBe(204);
    const before = await verdictCount();
    const { sku: _sku, ...byId } = lotBody(gone.sku, 22);
    const res = await request(t.app).post('/v1/lots').set(auth()).send({ ...byId, productId: gone.id });
    expectProblem(res, 422, '/body/productId');
    expect(res.body.detail).toMatch(/archived/);
    expectProblem(await request(t.app).post('/v1/lots').set(auth()).send(lotBody(gone.sku, 22)), 422, '/body/sku');
    expect(await verdictCount()).toBe(before);
  });

  it('answers 413 above 1 000 000 measurements', async () => {
    const res = await request(t.app)
      .post('/v1/lots')
      .set(auth())
      .send({ ...lotBody(product.sku, 21), lotSize: 2_000_000, measurements: new Array(1_000_001).fill(500) });
    expectProblem(res, 413);
  }, 60_000);
});

describe('idempotency', () => {
  it('replays the first response byte for byte; another body with the same key is a 422', async () => {
    const body = lotBody(product.sku, 30);
    const first = await request(t.app).post('/v1/lots').set(auth()).set('Idempotency-Key', 'idem-30').send(body);
    expect(first.status).toBe(201);
    const again = await request(t.app).post('/v1/lots').set(auth()).set('Idempotency-Key', 'idem-30').send(body);
    expect(again.status).toBe(201);
    expect(again.text).toBe(first.text);
    expect(again.headers['idempotent-replayed']).toBe('true');
    const other = await request(t.app).post('/v1/lots').set(auth()).set('Idempotency-Key', 'idem-30').send({ ...body, lotCode: 'OTHER' });
    expectProblem(other, 422);
    expect(other.body.type).toMatch(/idempotency-key-reused/);
    // The key is bound to the body's bytes (as the API description says): a retry is sent as it
    // was first sent; the same lot written with another key order or spacing is another body.
    const respaced = await request(t.app).post('/v1/lots').set(auth()).set('Idempotency-Key', 'idem-30').set('Content-Type', 'application/json').send(JSON.stringify(body, null, 2));
    expectProblem(respaced, 422);
    const verbatim = await request(t.app).post('/v1/lots').set(auth()).set('Idempotency-Key', 'idem-30').set('Content-Type', 'application/json').send(JSON.stringify(body));
    expect(verbatim.text).toBe(first.text);
  });

  it('creates exactly one verdict for concurrent retries with one key', async () => {
    const before = await verdictCount();
    const body = lotBody(product.sku, 31);
    const replies = await Promise.all(
      Array.from({ length: 12 }, () => request(t.app).post('/v1/lots').set(auth()).set('Idempotency-Key', 'idem-31').send(body)),
    );
    expect(replies.every((r) => r.status === 201)).toBe(true);
    expect(new Set(replies.map((r) => r.text)).size).toBe(1);
    expect(await verdictCount()).toBe(before + 1);
  });
});

describe('second samples', () => {
  it('judges a second sample together with the first and links the verdicts', async () => {
    // Directive 76/211/EEC Annex II 2.2.1, lot 100–500: first sample 30, accept ≤ 1, reject ≥ 3 → 2 defectives need a second sample.
    const firstValues = [...measurements(40, 28, 504, 1.5), 480.0, 481.0];
    const first = await request(t.app)
      .post('/v1/lots')
      .set(auth())
      .send({ ...lotBody(product.sku, 40), lotSize: 400, measurements: firstValues });
    expect(first.status, JSON.stringify(first.body)).toBe(201);
    expect(first.body.decision).toBe('second-sample-required');
    const second = await request(t.app)
      .post('/v1/lots')
      .set(auth())
      .send({ firstSampleVerdictId: first.body.id, measurementUnit: 'g', measurements: measurements(41, 30, 504, 1.5) });
    expect(second.status, JSON.stringify(second.body)).toBe(201);
    expect(second.body.firstSampleVerdictId).toBe(first.body.id);
    expect(second.body.lot.lotCode).toBe(first.body.lot.lotCode);
    expect(second.body.result.net.count).toBe(60);
    expect(second.body.decision).toBe('conforming');
    const twice = await request(t.app)
      .post('/v1/lots')
      .set(auth())
      .send({ firstSampleVerdictId: first.body.id, measurementUnit: 'g', measurements: measurements(42, 30, 504, 1.5) });
    expectProblem(twice, 409);
  });
});

describe('products', () => {
  it('editing a product leaves stored verdicts with the spec they were judged with', async () => {
    const p = await createProduct(t.app, key, { sku: 'T-EDIT-1', nominalQuantity: 500 });
    const v = await request(t.app).post('/v1/lots').set(auth()).send(lotBody('T-EDIT-1', 50));
    expect(v.status).toBe(201);
    const patched = await request(t.app).patch(`/v1/products/${p.id}`).set(auth()).send({ nominalQuantity: 750 });
    expect(patched.status).toBe(200);
    expect(patched.body.nominalQuantity).toBe(750);
    const again = await request(t.app).get(`/v1/verdicts/${v.body.id}`).set(auth());
    expect(again.body.product.spec.nominalQuantity).toBe(500);
  });

  it('refuses a duplicate SKU and a spec the engine cannot use, naming the field', async () => {
    const dup = await request(t.app).post('/v1/products').set(auth()).send({ ...(await import('../support/lots')).OATS });
    expectProblem(dup, 409);
    const bad = await request(t.app).post('/v1/products').set(auth()).send({ sku: 'T-BAD', name: 'x', nominalQuantity: 500, unit: 'g', tareMode: 'fixed', rulebook: { id: 'eu-76-211' } });
    expectProblem(bad, 400, '/body/fixedTare');
    const plan = await request(t.app).post('/v1/products').set(auth()).send({ ...(await import('../support/lots')).OATS, sku: 'T-PLAN-X', rulebook: { id: 'eu-76-211', params: { nonDestructivePlan: 'triple' } } });
    expectProblem(plan, 422, '/body/rulebook/params/nonDestructivePlan');
  });

  it('judges a product that chose the UK single plan by it (SI 2006/659 Sch. 2 para 3.3–3.5: lot 100–500 → 50 packs, accept ≤ 3)', async () => {
    await createProduct(t.app, key, { sku: 'T-UK-SINGLE', rulebook: { id: 'eu-76-211', params: { nonDestructivePlan: 'single' } } });
    const values = [...measurements(90, 47, 505, 1.5), 484, 484, 484];
    const v = await request(t.app).post('/v1/lots').set(auth()).send({ ...lotBody('T-UK-SINGLE', 90), lotSize: 400, measurements: values });
    expect(v.status, JSON.stringify(v.body)).toBe(201);
    expect(v.body.product.spec.rulebook).toEqual({ id: 'eu-76-211', params: { nonDestructivePlan: 'single' } });
    const t1 = v.body.result.criteria.find((c: { id: string }) => c.id === 't1');
    expect(t1).toMatchObject({ observed: 3, limit: 3, passed: true });
    expect(t1.sentence).toMatch(/UK SI 2006\/659/);
  });
});

describe('verdicts are append-only', () => {
  it('an UPDATE or DELETE on a verdict row fails in the database, even as the tables\' owner (the trigger)', async () => {
    const v = await request(t.app).post('/v1/lots').set(auth()).send(lotBody(product.sku, 60));
    // The app's own role may not even try (ledger-privileges.test.ts); the owner meets the trigger.
    const sq = new Sequelize(testOwnerUrl(), { dialect: 'postgres', logging: false });
    try {
      await expect(sq.query("UPDATE verdicts SET decision = 'conforming' WHERE id = $1", { bind: [v.body.id] })).rejects.toThrow(/append-only/);
      await expect(sq.query('DELETE FROM verdicts WHERE id = $1', { bind: [v.body.id] })).rejects.toThrow(/append-only/);
    } finally {
      await sq.close();
    }
    const still = await request(t.app).get(`/v1/verdicts/${v.body.id}`).set(auth());
    expect(still.body.seal.value).toBe(v.body.seal.value);
  });
});

describe('verifying', () => {
  it('walks an intact chain, recomputes a verdict, and checks a held document', async () => {
    const chain = await request(t.app).get('/v1/ledger/verify').set(auth());
    expect(chain.status).toBe(200);
    expect(chain.body.intact).toBe(true);
    expect(chain.body.verdictsChecked).toBe(await verdictCount());

    const list = await request(t.app).get('/v1/verdicts?limit=2').set(auth());
    expect(list.body.items).toHaveLength(2);
    expect(list.body.items[0].seal.sequence).toBeGreaterThan(list.body.items[1].seal.sequence);
    const next = await request(t.app).get(`/v1/verdicts?limit=2&cursor=${list.body.nextCursor}`).set(auth());
    expect(next.body.items[0].seal.sequence).toBeLessThan(list.body.items[1].seal.sequence);

    const id = list.body.items[0].id;
    const re = await request(t.app).post(`/v1/verdicts/${id}/recompute`).set(auth());
    expect(re.status).toBe(200);
    expect(re.body.matches).toBe(true);

    const seal = await request(t.app).get(`/v1/seals/${list.body.items[0].seal.value}`).set(auth());
    expect(seal.body.next).toBeNull();
    expect(seal.body.previous.sequence).toBe(list.body.items[0].seal.sequence - 1);
    const ok = await request(t.app).post('/v1/seals/verify').set(auth()).send(seal.body.document);
    expect(ok.body).toMatchObject({ valid: true, hashMatches: true, signatureValid: true, inLedger: true });
    const tampered = structuredClone(seal.body.document);
    tampered.record.result.decision = 'conforming';
    tampered.record.lot.lotCode = 'CHANGED';
    const bad = await request(t.app).post('/v1/seals/verify').set(auth()).send(tampered);
    expect(bad.body.valid).toBe(false);
    expect(bad.body.hashMatches).toBe(false);
  });

  it('exports CSV and NDJSON, oldest first', async () => {
    const csv = await request(t.app).get('/v1/exports/verdicts?format=csv').set(auth());
    expect(csv.status).toBe(200);
    expect(csv.headers['content-type']).toMatch(/text\/csv/);
    const rows = csv.text.trim().split('\r\n');
    expect(rows[0]).toMatch(/^sequence,verdict_id/);
    expect(rows.length - 1).toBe(await verdictCount());
    const nd = await request(t.app).get(`/v1/exports/verdicts?format=ndjson&decision=conforming`).set(auth()).buffer(true).parse((res, cb) => {
      let s = '';
      res.on('data', (c: Buffer) => (s += c.toString('utf8')));
      res.on('end', () => cb(null, s));
    });
    // lotproof.export/2: a header naming the checkpoint and the filter, then the documents with their proofs.
    const [header, ...lines] = (nd.body as string).trim().split('\n').map((l) => JSON.parse(l));
    expect(header).toMatchObject({ format: 'lotproof.export/2', complete: false, filter: { decision: 'conforming' }, from: 1, to: header.checkpoint.treeSize });
    expect(lines.length).toBeGreaterThan(2);
    expect(lines.every((d) => d.record.result.decision === 'conforming')).toBe(true);
    expect(lines.every((d) => d.inclusion.treeSize === header.checkpoint.treeSize && d.inclusion.leafIndex === d.record.sequence - 1)).toBe(true);
    expect(lines[0].record.sequence).toBeLessThan(lines[1].record.sequence);
  });
});

describe('tenant isolation', () => {
  it('another organisation gets 404 for our verdict, seal, product and export, and an empty list', async () => {
    const other = await createTestOrganisation('Other packer');
    const otherKey = await createTestKey(other.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
    const mine = await request(t.app).post('/v1/lots').set(auth()).send(lotBody(product.sku, 70));
    const as = { Authorization: `Bearer ${otherKey}` };
    expect((await request(t.app).get(`/v1/verdicts/${mine.body.id}`).set(as)).status).toBe(404);
    expect((await request(t.app).get(`/v1/verdicts/${mine.body.id}/export`).set(as)).status).toBe(404);
    expect((await request(t.app).post(`/v1/verdicts/${mine.body.id}/recompute`).set(as)).status).toBe(404);
    expect((await request(t.app).get(`/v1/seals/${mine.body.seal.value}`).set(as)).status).toBe(404);
    expect((await request(t.app).get(`/v1/products/${product.id}`).set(as)).status).toBe(404);
    expect((await request(t.app).patch(`/v1/products/${product.id}`).set(as).send({ name: 'x' })).status).toBe(404);
    expect((await request(t.app).get('/v1/verdicts').set(as)).body.items).toEqual([]);
    const lot = await request(t.app).post('/v1/lots').set(as).send(lotBody(product.sku, 71));
    expectProblem(lot, 422, '/body/sku');
    const sealCheck = await request(t.app).post('/v1/seals/verify').set(as).send((await request(t.app).get(`/v1/seals/${mine.body.seal.value}`).set(auth())).body.document);
    expect(sealCheck.body.inLedger).toBe(false);
    expect((await request(t.app).get('/v1/ledger/verify').set(as)).body).toMatchObject({ intact: true, verdictsChecked: 0 });
  });
});
