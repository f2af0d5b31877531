// Least privilege when keys issue keys: a `keys:manage` key cannot mint a key with scopes it lacks.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ApiKey } from '../../server/models';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';

let t: TestApp;
let orgId: string;

beforeAll(async () => {
  t = buildTestApp();
  orgId = (await createTestOrganisation('Scope packer')).id;
});
afterAll(() => t.close());

describe('issuing keys with a key', () => {
  it('refuses scopes the issuing key does not hold, with a 422 naming /body/scopes, and stores no key', async () => {
    const manager = await createTestKey(orgId, ['keys:manage']);
    const before = await ApiKey.count({ where: { organisationId: orgId } });
    const res = await request(t.app)
      .post('/v1/api-keys')
      .set('Authorization', `Bearer ${manager}`)
      .send({ name: 'escalation attempt', scopes: ['lots:submit', 'keys:manage'] });
    expect(res.status).toBe(422);
    expect(res.headers['content-type']).toMatch(/problem\+json/);
    expect(res.body.errors).toEqual([{ pointer: '/body/scopes', detail: 'not held by the issuing key: lots:submit' }]);
    expect(await ApiKey.count({ where: { organisationId: orgId } })).toBe(before);
  });

  it('allows a key to issue a key with a subset of its own scopes', async () => {
    const manager = await createTestKey(orgId, ['keys:manage', 'verdicts:read']);
    const res = await request(t.app)
      .post('/v1/api-keys')
      .set('Authorization', `Bearer ${manager}`)
      .send({ name: 'read-only dashboard', scopes: ['verdicts:read'] });
    expect(res.status).toBe(201);
    expect(res.body.key.scopes).toEqual(['verdicts:read']);
  });
});
