// Issue 16, "the verdict shows which user or which key submitted it": the record, the row and the
// view name the submitter — a console user by id and e-mail, an API key by id, name and visible
// prefix — and never a secret.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createTestUser, sessionCookieFor } from '../support/identity';
import { createProduct, lotBody } from '../support/lots';

let t: TestApp;
let key: string;
let orgId: string;
const C = { 'X-Lotproof-Console': '1' };

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Submitter packer (test)');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  await createProduct(t.app, key, { sku: 'T-WHO-500' });
});
afterAll(() => t.close());

describe('who submitted a lot', () => {
  it('an API key: named by id, name and prefix in the view, the record and the CSV export; its secret nowhere', async () => {
    const me = await request(t.app).get('/v1/me').set('Authorization', `Bearer ${key}`);
    const keyId = me.body.keyId as string;
    // the key's visible prefix is the part between "lpk_" and the next "_" (api-key-store.ts issues `lpk_<prefix>_<secret>`)
    const prefix = key.split('_')[1]!;
    const res = await request(t.app).post('/v1/lots').set('Authorization', `Bearer ${key}`).send({ ...lotBody('T-WHO-500', 1), lotCode: 'WHO-1' });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const expected = { kind: 'api-key', keyId, name: 'test lots:submit verdicts:read products:write audit:read', prefix };
    expect(res.body.submittedBy).toEqual(expected);
    const sealed = await request(t.app).get(`/v1/seals/${res.body.seal.value}`).set('Authorization', `Bearer ${key}`);
    expect(sealed.body.document.record.submittedBy).toEqual(expected);
    expect(sealed.text).not.toContain(key.split('_').slice(2).join('_'));
    const again = await request(t.app).get(`/v1/verdicts/${res.body.id}`).set('Authorization', `Bearer ${key}`);
    expect(again.body.submittedBy).toEqual(expected);
    const csv = await request(t.app).get('/v1/exports/verdicts?format=csv&lotCode=WHO-1').set('Authorization', `Bearer ${key}`);
    expect(csv.text).toContain(`API key ${expected.name} (${prefix})`);
  });

  it('a console user: named by id and e-mail', async () => {
    const user = await createTestUser(orgId, 'quality');
    const cookie = await sessionCookieFor(user);
    const res = await request(t.app).post('/v1/lots').set('Cookie', cookie).set(C).send({ ...lotBody('T-WHO-500', 2), lotCode: 'WHO-2' });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    expect(res.body.submittedBy).toEqual({ kind: 'user', userId: user.id, email: user.email });
    const sealed = await request(t.app).get(`/v1/seals/${res.body.seal.value}`).set('Cookie', cookie);
    expect(sealed.body.document.record.submittedBy).toEqual({ kind: 'user', userId: user.id, email: user.email });
  });
});
