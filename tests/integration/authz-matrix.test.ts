// The authorisation matrix: EVERY operation of the merged OpenAPI document × every kind of caller —
// no credential, a malformed/unknown key, a revoked key, an expired key, a key of each single scope,
// a console session of each role and of users holding several roles (any one of them allowed
// passes), and credentials of another organisation — against the rule the
// operation declares in `x-lotproof-access`. Operations added later are covered without editing
// this file; an operation without a rule cannot even be loaded (openapi/load.ts throws).
import { randomBytes, randomUUID } from 'node:crypto';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Operation } from '../../openapi/load';
import { ApiKey, User, type Organisation } from '../../server/models';
import type { RunningSmtpFake } from '../../server/platform/smtp-fake';
import { issueInvitation } from '../../server/identity/invitations';
import { ROLES, SCOPES, type Role, type Scope } from '../../server/core/principal';
import { startSession } from '../../server/identity/sessions';
import { buildTestApp, createTestKey, createTestOrganisation, testConfig, type TestApp } from '../support/app';
import { createTestUser, startTestSmtp } from '../support/identity';
import { apiOperations as operations, exampleBody, parametersOf, resolveRef as resolve, type Doc } from '../support/operations';
const UNSAFE = new Set(['post', 'put', 'patch', 'delete']);

let smtp: RunningSmtpFake;
let t: TestApp;
let orgA: Organisation;
let orgB: Organisation;
const usersA = {} as Record<Role, User>;
/** Users of A holding several roles at once (issue 16). */
const ROLE_SETS: Role[][] = [['quality', 'auditor'], ['admin', 'quality'], ['admin', 'auditor'], ['admin', 'quality', 'auditor']];
const multiA = new Map<Role[], User>();
let adminB: User;
const keysA = {} as Record<Scope, string>;
let allScopesB: string;
let revokedKey: string;
let expiredKey: string;
/** Real ids of organisation A's resources, by path parameter name. */
const fixtureIds: Record<string, string> = {};
let cells = 0;

/** A value for a path parameter: a real id of organisation A where we have one, else one its schema accepts. */
function sampleFor(p: Doc): string {
  if (fixtureIds[p.name]) return fixtureIds[p.name]!;
  const schema = resolve(p.schema ?? {});
  if (schema.format === 'uuid') return randomUUID();
  if (typeof schema.pattern === 'string' && /a-f|A-F|\[0-9a-f/.test(schema.pattern)) return randomBytes(32).toString('hex');
  if (schema.type === 'integer' || schema.type === 'number') return '1';
  return 'sample';
}

function urlFor(op: Operation): string {
  let url = op.path;
  for (const p of parametersOf(op).filter((x) => x.in === 'path')) url = url.replace(`{${p.name}}`, encodeURIComponent(sampleFor(p)));
  return url;
}

type Credential = { kind: 'none' } | { kind: 'bearer'; value: string } | { kind: 'session'; user: User; csrf?: boolean };

async function call(op: Operation, cred: Credential, body: unknown = {}): Promise<request.Response> {
  cells++;
  let r = request(t.app)[op.method](urlFor(op));
  if (cred.kind === 'bearer') r = r.set('Authorization', `Bearer ${cred.value}`);
  if (cred.kind === 'session') {
    const { token } = await startSession(cred.user, 1);
    r = r.set('Cookie', `lotproof_session=${token}`);
    if (cred.csrf !== false) r = r.set('X-Lotproof-Console', '1');
  }
  if (op.method !== 'get' && op.method !== 'delete' && body !== undefined) r = r.send(body as object);
  return r;
}

function allowsScope(op: Operation, scope: Scope): boolean {
  return op.access === 'public' || (op.access.scopes ?? []).includes(scope);
}
function allowsRole(op: Operation, role: Role): boolean {
  return op.access === 'public' || (op.access.roles ?? []).includes(role);
}

function expectDenied(res: request.Response, status: 401 | 403, what: string) {
  expect(res.status, `${what}: ${res.text.slice(0, 300)}`).toBe(status);
  expect(res.headers['content-type'], what).toMatch(/^application\/problem\+json/);
}
function expectPassed(res: request.Response, what: string) {
  expect([401, 403], `${what} was refused: ${res.text.slice(0, 300)}`).not.toContain(res.status);
  expect(res.status, `${what} must never be a server error: ${res.text.slice(0, 300)}`).toBeLessThan(500);
}

/** Creates A's resources through the API's own examples, so path parameters get real ids. */
async function seedThroughExamples(): Promise<void> {
  let product: { id: string; sku: string } | undefined;
  const adminCookie = `lotproof_session=${(await startSession(usersA.admin, 1)).token}`;
  for (const op of operations) {
    if (op.method !== 'post' || op.access === 'public' || /\{/.test(op.path)) continue;
    if (!(op.access.roles ?? []).includes('admin')) continue;
    let body = exampleBody(op);
    if (body === undefined) continue;
    // point examples that name a product at the product seeded just before
    if (product && body && typeof body === 'object' && !Array.isArray(body)) {
      const b = { ...(body as Record<string, unknown>) };
      if ('sku' in b) b.sku = product.sku;
      if ('productId' in b) b.productId = product.id;
      body = b;
    }
    const res = await request(t.app).post(op.path).set('Cookie', adminCookie).set('X-Lotproof-Console', '1').send(body as object);
    if (process.env.LOTPROOF_MATRIX_DEBUG) console.log(`seed ${op.operationId}: ${res.status} ${res.text.slice(0, 400)}`);
    if (res.status >= 300 || !res.body || typeof res.body !== 'object') continue;
    if (typeof res.body.sku === 'string' && typeof res.body.id === 'string') product ??= { id: res.body.id, sku: res.body.sku };
    const resource = op.path.split('/').filter(Boolean).pop()!.replace(/s$/, '');
    const id = (res.body.id ?? res.body.key?.id) as unknown;
    if (typeof id === 'string' && /^[a-z]+$/.test(resource)) fixtureIds[`${resource}Id`] ??= id;
    if (resource === 'lot' && typeof id === 'string') fixtureIds.verdictId ??= id;
    const walk = (v: unknown, key = '', path = ''): void => {
      if (typeof v === 'string') {
        if (/Id$/.test(key) && /^[0-9a-f-]{36}$/.test(v)) fixtureIds[key] ??= v;
        // the verdict's own seal: `seal` itself, or `seal.value`/`seal.hash`; never `previousSeal`
        if (/(^|\.)seal(\.(value|hash))?$/.test(path) && /^[0-9a-f]{64}$/.test(v)) fixtureIds.seal ??= v;
      } else if (v && typeof v === 'object') for (const [k, x] of Object.entries(v)) walk(x, k, path ? `${path}.${k}` : k);
    };
    walk(res.body);
  }
}

beforeAll(async () => {
  smtp = await startTestSmtp();
  t = buildTestApp({ smtp: { ...testConfig().smtp, host: smtp.host, port: smtp.port } });
  orgA = await createTestOrganisation('Matrix packer A');
  orgB = await createTestOrganisation('Matrix packer B');
  for (const role of ROLES) usersA[role] = await createTestUser(orgA.id, role);
  for (const set of ROLE_SETS) {
    const u = await createTestUser(orgA.id, set[0]!);
    await u.update({ roles: set });
    multiA.set(set, await User.findByPk(u.id) as User);
  }
  adminB = await createTestUser(orgB.id, 'admin');
  for (const scope of SCOPES) keysA[scope] = await createTestKey(orgA.id, [scope]);
  allScopesB = await createTestKey(orgB.id, [...SCOPES]);
  revokedKey = await createTestKey(orgA.id, [...SCOPES]);
  await ApiKey.update({ revokedAt: new Date() }, { where: { prefix: revokedKey.split('_')[1] } });
  expiredKey = await createTestKey(orgA.id, [...SCOPES], { expiresAt: new Date(Date.now() - 60_000) });

  // targets for path parameters (never the credentials used by the matrix)
  fixtureIds.userId = (await createTestUser(orgA.id, 'quality')).id;
  fixtureIds.keyId = (await ApiKey.findOne({ where: { prefix: (await createTestKey(orgA.id, ['verdicts:read'])).split('_')[1] } }))!.id;
  fixtureIds.invitationId = (
    await issueInvitation({ organisationId: orgA.id, kind: 'operator' }, { email: `target-${Date.now()}@packer.example`, role: 'auditor' }, { publicUrl: 'http://x', ttlHours: 1 })
  ).invitation.id;
  await seedThroughExamples();
}, 120_000);

afterAll(async () => {
  console.log(`authorisation matrix: ${operations.length} operations, ${cells} calls; real ids for ${Object.keys(fixtureIds).sort().join(', ')}`);
  await t.close();
  await smtp.stop();
});

describe('the document', () => {
  it('declares a rule for every operation, and the matrix sees every one of them', () => {
    expect(operations.length).toBeGreaterThan(10);
    for (const op of operations) expect(op.access, op.operationId).toBeTruthy();
    expect(operations.map((o) => o.operationId)).toEqual(expect.arrayContaining(['signIn', 'createApiKey', 'listAuditEvents', 'getCaller']));
  });
});

// Runs first, while organisation A's resources still exist (later cells may delete some).
describe('another organisation never reaches this one', () => {
  for (const op of operations) {
    it(`${op.operationId} (${op.method.toUpperCase()} ${op.path})`, async () => {
      const aIds = [orgA.id, ...Object.values(usersA).map((u) => u.id), ...[...multiA.values()].map((u) => u.id), ...Object.values(fixtureIds)];
      const hasPathIds = parametersOf(op).some((p) => p.in === 'path' && fixtureIds[p.name]);
      const body = exampleBody(op) ?? {};
      for (const [label, cred] of [
        ['admin session of B', { kind: 'session', user: adminB }],
        ['all-scopes key of B', { kind: 'bearer', value: allScopesB }],
      ] as Array<[string, Credential]>) {
        const url = urlFor(op);
        const res = await call(op, cred, body);
        const what = `${op.operationId} with ${label}`;
        expect(res.status, `${what}: ${res.text.slice(0, 300)}`).toBeLessThan(500);
        if (hasPathIds) {
          // A's ids from B: not found (or refused before the lookup), never served
          expect([400, 403, 404, 415, 422], `${what} on A's ids: ${res.status} ${res.text.slice(0, 300)}`).toContain(res.status);
        }
        // ids the request itself named may be echoed (problem `instance`, `detail`); any other id of A is a leak
        for (const id of aIds.filter((x) => !url.includes(x))) expect(res.text.includes(id), `${what} revealed an id of organisation A: ${res.text.slice(0, 300)}`).toBe(false);
      }
    });
  }
});

describe('every operation × every caller', () => {
  for (const op of operations) {
    it(`${op.operationId} (${op.method.toUpperCase()} ${op.path}) answers each caller as its rule says`, async () => {
      const name = op.operationId;
      // no credential
      const none = await call(op, { kind: 'none' });
      if (op.access === 'public') expectPassed(none, `${name} without a credential`);
      else {
        expectDenied(none, 401, `${name} without a credential`);
        expect(none.headers['www-authenticate'], name).toMatch(/^Bearer/);
      }
      // bad, revoked and expired keys are refused everywhere, even on public operations
      const bad = 'lpk_' + 'Z'.repeat(12) + '_' + 'Z'.repeat(43);
      for (const [label, value] of [['malformed key', 'not-a-key'], ['unknown key', bad], ['revoked key', revokedKey], ['expired key', expiredKey]]) {
        expectDenied(await call(op, { kind: 'bearer', value: value! }), 401, `${name} with a ${label}`);
      }
      // a key of each single scope
      for (const scope of SCOPES) {
        const res = await call(op, { kind: 'bearer', value: keysA[scope] });
        if (allowsScope(op, scope)) expectPassed(res, `${name} with a ${scope} key`);
        else expectDenied(res, 403, `${name} with a ${scope} key`);
      }
      // a session of each role (with the console header on unsafe methods)
      for (const role of ROLES) {
        const res = await call(op, { kind: 'session', user: usersA[role] });
        if (allowsRole(op, role)) expectPassed(res, `${name} as ${role}`);
        else expectDenied(res, 403, `${name} as ${role}`);
      }
      // a session of several roles: passes when any one of them is allowed
      for (const [set, user] of multiA) {
        const res = await call(op, { kind: 'session', user });
        if (set.some((role) => allowsRole(op, role))) expectPassed(res, `${name} as ${set.join('+')}`);
        else expectDenied(res, 403, `${name} as ${set.join('+')}`);
      }
      // CSRF: an unsafe call on a session without X-Lotproof-Console is refused, whatever the role
      if (UNSAFE.has(op.method)) {
        const role = ROLES.find((r) => allowsRole(op, r)) ?? 'admin';
        const res = await call(op, { kind: 'session', user: usersA[role], csrf: false });
        expectDenied(res, 403, `${name} as ${role} without X-Lotproof-Console`);
      }
    });
  }
});
