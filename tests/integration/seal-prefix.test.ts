// Issue 16: "The short seal shown in lists works in the seal lookup (a unique prefix resolves; an
// ambiguous one says so)". GET /v1/seals/{seal} takes the full seal (64 hex digits) or its first 8
// to 63; a prefix is looked for among the caller's organisation's verdicts only, so it never
// reveals, names or counts another organisation's verdicts.
import request from 'supertest';
import { Sequelize } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, testOwnerUrl, type TestApp } from '../support/app';
import { createProduct, lotBody } from '../support/lots';

let t: TestApp;
let keyA: string;
let keyB: string;
let orgA: string;
let sealA: { id: string; seal: string };
let sealB: { id: string; seal: string };

beforeAll(async () => {
  t = buildTestApp();
  const a = await createTestOrganisation('Prefix packer A (test)');
  const b = await createTestOrganisation('Prefix packer B (test)');
  orgA = a.id;
  keyA = await createTestKey(a.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  keyB = await createTestKey(b.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  const pa = await createProduct(t.app, keyA, { sku: 'T-PREFIX-A' });
  const pb = await createProduct(t.app, keyB, { sku: 'T-PREFIX-B' });
  const la = await request(t.app).post('/v1/lots').set('Authorization', `Bearer ${keyA}`).send(lotBody(pa.sku, 701));
  const lb = await request(t.app).post('/v1/lots').set('Authorization', `Bearer ${keyB}`).send(lotBody(pb.sku, 702));
  expect(la.status).toBe(201);
  expect(lb.status).toBe(201);
  sealA = { id: la.body.id, seal: la.body.seal.value };
  sealB = { id: lb.body.id, seal: lb.body.seal.value };
});
afterAll(() => t.close());

const lookup = (key: string, seal: string) => request(t.app).get(`/v1/seals/${seal}`).set('Authorization', `Bearer ${key}`);

describe('a short seal in the seal lookup', () => {
  it('resolves a unique prefix of 8, 10 (as the lists show it) or 63 hex digits, in either case, to the full record', async () => {
    for (const prefix of [sealA.seal.slice(0, 8), sealA.seal.slice(0, 10), sealA.seal.slice(0, 63), sealA.seal.slice(0, 12).toUpperCase()]) {
      const res = await lookup(keyA, prefix);
      expect(res.status, `${prefix}: ${JSON.stringify(res.body)}`).toBe(200);
      expect(res.body.verdict.id).toBe(sealA.id);
      expect(res.body.document.seal).toBe(sealA.seal);
    }
  });

  it('keeps the full seal working as before', async () => {
    const res = await lookup(keyA, sealA.seal);
    expect(res.status).toBe(200);
    expect(res.body.verdict.id).toBe(sealA.id);
  });

  it('refuses fewer than 8 hex digits, or a character that is not hex, with a 400 naming the path parameter', async () => {
    for (const bad of [sealA.seal.slice(0, 7), `${sealA.seal.slice(0, 9)}z`]) {
      const res = await lookup(keyA, bad);
      expect(res.status, bad).toBe(400);
      // the validator names path parameters "/params/…" (as in ledger-proofs.test.ts)
      expect(res.body.errors.map((e: { pointer: string }) => e.pointer)).toContain('/params/seal');
    }
  });

  it("never finds another organisation's verdict: B's prefix is a 404 for A, with no count, and the other way round", async () => {
    const res = await lookup(keyA, sealB.seal.slice(0, 10));
    expect(res.status).toBe(404);
    expect(res.body.type).toBe('https://lotproof.dev/problems/not-found');
    expect(JSON.stringify(res.body)).not.toContain(sealB.id);
    expect(res.body.candidates).toBeUndefined();
    expect((await lookup(keyB, sealA.seal.slice(0, 10))).status).toBe(404);
    // the full seal of another organisation is not found either (unchanged behaviour)
    expect((await lookup(keyA, sealB.seal)).status).toBe(404);
  });

  it('says how many verdicts share an ambiguous prefix (409 naming the parameter), and resolves once the prefix is long enough', async () => {
    // Two real seals sharing their first 8 hex digits would take some 2^16 lots (birthday bound on
    // 32 bits), so the test writes a second row with such a seal as the tables' owner, in
    // organisation A's throwaway ledger, as lots-judged-once.test.ts does for its unique index.
    const owner = new Sequelize(testOwnerUrl(), { logging: false });
    const twin = `${sealA.seal.slice(0, 9)}${sealA.seal[9] === '0' ? '1' : '0'}${'e'.repeat(54)}`;
    try {
      await owner.query(
        `INSERT INTO verdicts (id, organisation_id, sequence, seal, previous_seal, signature, kid, record, product_id, product_sku, product_name,
           product_spec, lot_code, line, packed_at, lot_size, testing, measurement_unit, measurement_count, client_reference, source_format,
           decision, result, engine_version, rulebook_id, rulebook_version, recorded_at)
         SELECT gen_random_uuid(), organisation_id, (SELECT max(sequence) + 1 FROM verdicts WHERE organisation_id = $2), $3,
           seal, signature, kid, record, product_id, product_sku, product_name, product_spec, lot_code || '-TWIN', line, packed_at, lot_size, testing,
           measurement_unit, measurement_count, client_reference, source_format, decision, result, engine_version, rulebook_id, rulebook_version, recorded_at
         FROM verdicts WHERE id = $1`,
        { bind: [sealA.id, orgA, twin] },
      );
    } finally {
      await owner.close();
    }
    const res = await lookup(keyA, sealA.seal.slice(0, 8));
    expect(res.status, JSON.stringify(res.body)).toBe(409);
    expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
    expect(res.body.type).toBe('https://lotproof.dev/problems/ambiguous-seal-prefix');
    expect(res.body.candidates).toBe(2);
    expect(res.body.errors.map((e: { pointer: string }) => e.pointer)).toEqual(['/path/seal']);
    // neither seal is given away in the refusal: the caller must give more digits
    expect(JSON.stringify(res.body)).not.toContain(twin);
    // ten digits tell them apart (the twin differs at the tenth)
    const ten = await lookup(keyA, sealA.seal.slice(0, 10));
    expect(ten.status).toBe(200);
    expect(ten.body.verdict.id).toBe(sealA.id);
    // organisation B sees nothing of A's ambiguity
    expect((await lookup(keyB, sealA.seal.slice(0, 8))).status).toBe(404);
  });
});
