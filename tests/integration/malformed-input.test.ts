// Malformed input against EVERY operation of the OpenAPI document: each field of the documented
// example body made the wrong type, null, empty, oversized or out of range; bodies that are not
// objects or not JSON at all; every query and path parameter given a value its schema refuses.
// Whatever the answer, it is never a server error, a refusal is an RFC 9457 problem document, and
// a refused field or parameter is named in it (its pointer, e.g. /body/lotSize or /query/limit).
// Operations added later are swept without editing this file.
import { randomUUID } from 'node:crypto';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Operation } from '../../openapi/load';
import type { User } from '../../server/models';
import { SCOPES } from '../../server/core/principal';
import { startSession } from '../../server/identity/sessions';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createTestUser } from '../support/identity';
import { apiOperations, exampleBody, parametersOf, resolveRef, type Doc } from '../support/operations';

let t: TestApp;
let key: string;
const users: Partial<Record<string, User>> = {};
let product: { id: string; sku: string } | null = null;
let calls = 0;
let namedRefusals = 0;

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Malformed input packer');
  key = await createTestKey(org.id, [...SCOPES]);
  for (const role of ['admin', 'quality', 'auditor'] as const) users[role] = await createTestUser(org.id, role);
  const create = apiOperations.find((o) => o.operationId === 'createProduct')!;
  const res = await request(t.app).post('/v1/products').set('Authorization', `Bearer ${key}`).send(exampleBody(create) as object);
  expect(res.status, res.text).toBe(201);
  product = { id: res.body.id, sku: res.body.sku };
}, 60_000);

afterAll(async () => {
  console.log(`malformed input: ${apiOperations.length} operations, ${calls} calls, ${namedRefusals} refusals checked for the field's name`);
  await t.close();
});

/** Headers of a caller the operation admits: an all-scopes key where scopes are accepted, else a console session. */
async function credentialsFor(op: Operation): Promise<Record<string, string>> {
  if (op.access === 'public') return {};
  if ((op.access.scopes ?? []).length > 0) return { Authorization: `Bearer ${key}` };
  const { token } = await startSession(users[op.access.roles![0]!]!, 1);
  return { Cookie: `lotproof_session=${token}`, 'X-Lotproof-Console': '1' };
}

function pathFor(op: Operation, bad?: { name: string; value: string }): string {
  let url = op.path;
  for (const p of parametersOf(op).filter((x) => x.in === 'path')) {
    const schema = resolveRef(p.schema ?? {});
    const good = schema.format === 'uuid' ? randomUUID() : 'a'.repeat(64);
    url = url.replace(`{${p.name}}`, encodeURIComponent(bad && bad.name === p.name ? bad.value : good));
  }
  return url;
}

async function send(op: Operation, opts: { url?: string; body?: unknown; raw?: string }): Promise<request.Response> {
  calls++;
  const r = request(t.app)[op.method](opts.url ?? pathFor(op)).set(await credentialsFor(op));
  if (opts.raw !== undefined) return r.set('Content-Type', 'application/json').send(opts.raw);
  if (opts.body !== undefined) return r.set('Content-Type', 'application/json').send(JSON.stringify(opts.body));
  return r;
}

/** Never a server error; a refusal is a problem document whose status is the response's. */
function expectClientAnswer(res: request.Response, what: string): void {
  expect(res.status, `${what} → ${res.status} ${res.text.slice(0, 300)}`).toBeLessThan(500);
  if (res.status >= 400) {
    expect(res.headers['content-type'], `${what}: problem+json`).toMatch(/^application\/problem\+json/);
    expect(res.body.status, `${what}: problem status`).toBe(res.status);
    expect(typeof res.body.title, `${what}: problem title`).toBe('string');
  }
}

/** A 400 names what it refused: the pointer (or at least the name) of the field or parameter. */
function expectNamed(res: request.Response, name: string, what: string): void {
  if (res.status !== 400) return;
  const named = JSON.stringify(res.body.errors ?? []).includes(name) || String(res.body.detail ?? '').includes(name);
  expect(named, `${what}: the 400 does not name ${name}: ${res.text.slice(0, 400)}`).toBe(true);
  namedRefusals++;
}

/** Values of the wrong kind for a field whose example value is `v`. */
function wrongValues(v: unknown): unknown[] {
  const common: unknown[] = [null, { nested: { deeper: [1, 2, 3] } }];
  if (typeof v === 'string') return [...common, 12345, true, [], '', 'x'.repeat(20_000), '\u0000\ud800'];
  if (typeof v === 'number') return [...common, 'not a number', true, [], -1, 1e308, -1e308, Number.isInteger(v) ? 2.5 : 0];
  if (typeof v === 'boolean') return [...common, 'yes', 1, []];
  if (Array.isArray(v)) return [...common, 'not a list', {}, [], [null], ['x'], Array.from({ length: 3 }, () => ({ a: 1 }))];
  if (v && typeof v === 'object') return [...common.slice(0, 1), 'not an object', [], 7, {}];
  return common;
}

/** The example body with one field (a path of keys) set to a value. */
function withField(body: Doc, path: string[], value: unknown): Doc {
  const copy = structuredClone(body);
  let o: Doc = copy;
  for (const k of path.slice(0, -1)) o = o[k];
  o[path[path.length - 1]!] = value;
  return copy;
}

/** Fields of the example, top level and one level down. */
function fieldsOf(body: Doc): string[][] {
  const out: string[][] = [];
  for (const [k, v] of Object.entries(body)) {
    out.push([k]);
    if (v && typeof v === 'object' && !Array.isArray(v)) for (const k2 of Object.keys(v)) out.push([k, k2]);
  }
  return out;
}

function exampleFor(op: Operation): Doc | null {
  const ex = exampleBody(op);
  if (!ex || typeof ex !== 'object' || Array.isArray(ex)) return null;
  const b = structuredClone(ex) as Doc;
  if (product && 'sku' in b) b.sku = product.sku;
  if (product && 'productId' in b) b.productId = product.id;
  return b;
}

const withBody = apiOperations.filter((op) => op.method !== 'get' && op.method !== 'delete' && op.definition.requestBody);

describe('bodies that are not what the operation takes', () => {
  for (const op of withBody) {
    it(`${op.operationId}: not an object, not JSON, empty, unknown fields`, async () => {
      for (const body of [[], 'a string', 42, null, {}]) {
        expectClientAnswer(await send(op, { body }), `${op.operationId} with ${JSON.stringify(body)}`);
      }
      for (const raw of ['{"a": ', '{"a": 1,}', 'NaN', '\u00ff\u00fe', '{"a": 1}{"b": 2}']) {
        const res = await send(op, { raw });
        expectClientAnswer(res, `${op.operationId} with ${JSON.stringify(raw)}`);
        expect(res.status, `${op.operationId} with ${JSON.stringify(raw)}`).toBeGreaterThanOrEqual(400);
      }
      const ex = exampleFor(op);
      if (ex) {
        const res = await send(op, { body: { ...ex, notAField: 1 } });
        expectClientAnswer(res, `${op.operationId} with an unknown field`);
      }
    }, 60_000);
  }
});

describe('each field of the example body made wrong', () => {
  for (const op of withBody.filter((o) => exampleFor(o))) {
    it(`${op.operationId}`, async () => {
      const ex = exampleFor(op)!;
      for (const path of fieldsOf(ex)) {
        const current = path.reduce((o: any, k) => o?.[k], ex);
        for (const value of wrongValues(current)) {
          const what = `${op.operationId} with ${path.join('.')} = ${JSON.stringify(value)?.slice(0, 40)}`;
          const res = await send(op, { body: withField(ex, path, value) });
          expectClientAnswer(res, what);
          expectNamed(res, path[path.length - 1]!, what);
        }
        // and the field left out
        const without = structuredClone(ex);
        let o: Doc = without;
        for (const k of path.slice(0, -1)) o = o[k];
        delete o[path[path.length - 1]!];
        expectClientAnswer(await send(op, { body: without }), `${op.operationId} without ${path.join('.')}`);
      }
    }, 120_000);
  }
});

/** Values a parameter's schema refuses (as strings, as they travel in a URL). */
function badParameterValues(schema: Doc): string[] {
  const s = resolveRef(schema);
  const out = ['', '\u0000', 'x'.repeat(5_000)];
  if (s.type === 'integer' || s.type === 'number') out.push('abc', '1e999', '-5', '2.5', '99999999999999999999');
  if (s.format === 'uuid') out.push('not-a-uuid', '00000000-0000-0000-0000-00000000000g');
  if (s.format === 'date-time' || s.format === 'date') out.push('yesterday', '2026-13-45', '2026-02-30T25:61:00Z');
  if (s.format === 'date-time') out.push('0000-01-01T00:00:00Z', '2016-12-31T23:59:60Z', '2026-02-30T00:00:00Z', '0001-01-01T00:00:00+14:00');
  if (s.format === 'date') out.push('0000-12-31', '2026-02-30');
  if (s.enum) out.push('no-such-value');
  if (s.pattern) out.push('!!', 'ZZ');
  return out;
}

/** The operation's required query parameters other than `except`, with values their schema takes. */
function requiredQuery(op: Operation, except: string): string {
  return parametersOf(op)
    .filter((p) => p.in === 'query' && p.required && p.name !== except)
    .map((p) => {
      const s = resolveRef(p.schema ?? {});
      return `&${p.name}=${encodeURIComponent(String(s.enum?.[0] ?? s.default ?? p.example ?? 'x'))}`;
    })
    .join('');
}

describe('query and path parameters their schema refuses', () => {
  for (const op of apiOperations) {
    const params = parametersOf(op).filter((p) => p.in === 'query' || p.in === 'path');
    if (params.length === 0) continue;
    it(`${op.operationId}`, async () => {
      const ex = exampleFor(op);
      for (const p of params) {
        for (const value of badParameterValues(p.schema ?? {})) {
          const what = `${op.operationId} with ${p.in} ${p.name}=${JSON.stringify(value.slice(0, 40))}`;
          const url = p.in === 'path' ? pathFor(op, { name: p.name, value }) : `${pathFor(op)}?${p.name}=${encodeURIComponent(value)}${requiredQuery(op, p.name)}`;
          if (p.in === 'path' && value === '') continue; // an empty segment is another path
          const res = await send(op, { url, body: ex ?? undefined });
          expectClientAnswer(res, what);
          expectNamed(res, p.name, what);
        }
      }
      // a query parameter the operation does not declare
      const res = await send(op, { url: `${pathFor(op)}?notAParameter=1${requiredQuery(op, '')}`, body: ex ?? undefined });
      expectClientAnswer(res, `${op.operationId} with an undeclared query parameter`);
    }, 120_000);
  }
});

describe('values the validator lets through and the guards refuse', () => {
  const auth = () => ({ Authorization: `Bearer ${key}` });

  it('a NUL character or a lone surrogate in a lot field: 400 naming the field, nothing stored', async () => {
    const submit = apiOperations.find((o) => o.operationId === 'submitLot')!;
    // the example lot is another product's (its packs are half this one's Qn): confirmed, as these tests are about the field guards
    const lot: Doc = { ...exampleFor(submit)!, confirmImplausible: true };
    const before = await request(t.app).get('/v1/verdicts?limit=200').set(auth());
    for (const [lotCode, detail] of [['L\u0000', /NUL/], ['L\ud800', /lone surrogate/], ['\udc00L', /lone surrogate/]] as const) {
      const res = await request(t.app).post('/v1/lots').set(auth()).send({ ...lot, lotCode });
      expect(res.status, res.text).toBe(400);
      expect(res.body.errors).toEqual([{ pointer: '/body/lotCode', detail: expect.stringMatching(detail) }]);
    }
    // a well-formed pair written as escapes is a character like any other
    const emoji = await request(t.app).post('/v1/lots').set(auth()).set('Content-Type', 'application/json')
      .send(JSON.stringify({ ...lot, lotCode: 'L-\ud83c\udf3e' }).replace('L-\ud83c\udf3e', 'L-\\ud83c\\udf3e'));
    expect(emoji.status, emoji.text).toBe(201);
    expect(emoji.body.lot.lotCode).toBe('L-\ud83c\udf3e');
    const after = await request(t.app).get('/v1/verdicts?limit=200').set(auth());
    expect(after.body.items.length).toBe(before.body.items.length + 1);
  });

  it('a key of a nested object is checked too, with its pointer escaped per RFC 6901', async () => {
    // (a product's rulebook params are a closed schema now, so the free-form record of verifySeal carries the key)
    const res = await request(t.app).post('/v1/seals/verify').set(auth()).send({ format: 'lotproof.sealed-verdict/1', record: { 'a/b\u0000': 1 }, seal: '0'.repeat(64), signature: 'x', kid: 'k' });
    expect(res.status, res.text).toBe(400);
    expect(res.body.errors).toEqual([{ pointer: '/body/record/a~1b\u0000', detail: expect.stringMatching(/NUL/) }]);
  });

  it('a page size of 1e999 (Infinity once coerced) is a 400 naming limit', async () => {
    for (const path of ['/v1/verdicts', '/v1/products', '/v1/audit-events']) {
      const res = await request(t.app).get(`${path}?limit=1e999`).set(auth());
      expect(res.status, `${path}: ${res.text}`).toBe(400);
      expect(res.body.errors[0].pointer).toBe('/query/limit');
    }
  });

  it('an instant JavaScript cannot read or PostgreSQL cannot store is a 400 naming the field; a real one is taken', async () => {
    const submit = apiOperations.find((o) => o.operationId === 'submitLot')!;
    // the example lot is another product's (its packs are half this one's Qn): confirmed, as these tests are about the field guards
    const lot: Doc = { ...exampleFor(submit)!, confirmImplausible: true };
    // ajv-formats takes year 0000 and second 60 (RFC 3339 allows a leap second); PostgreSQL has no
    // year 0, and JavaScript's Date reads neither; a day that does not exist is not one either.
    for (const packedAt of ['0000-01-01T00:00:00Z', '2016-12-31T23:59:60Z', '2026-02-30T06:00:00Z', '0001-01-01T00:00:00+14:00']) {
      const res = await request(t.app).post('/v1/lots').set(auth()).send({ ...lot, packedAt });
      expect(res.status, `${packedAt}: ${res.text}`).toBe(400);
      expect(res.body.errors[0].pointer).toBe('/body/packedAt');
    }
    const leapDay = await request(t.app).post('/v1/lots').set(auth()).send({ ...lot, packedAt: '2024-02-29T23:59:59.123456+01:00' });
    expect(leapDay.status, leapDay.text).toBe(201);
    expect(leapDay.body.lot.packedAt).toBe('2024-02-29T22:59:59.123Z');
    const from = await request(t.app).get(`/v1/verdicts?from=${encodeURIComponent('0000-01-01T00:00:00Z')}`).set(auth());
    expect([from.status, from.body.errors?.[0]?.pointer]).toEqual([400, '/query/from']);
    const day = await request(t.app).get('/v1/usage?from=0000-12-31&to=0001-01-02').set(auth());
    expect([day.status, day.body.errors?.[0]?.pointer]).toEqual([400, '/query/from']);
  });

  it('a measurement whose square overflows a double is refused, not judged with an overflowed spread', async () => {
    const submit = apiOperations.find((o) => o.operationId === 'submitLot')!;
    // the example lot is another product's (its packs are half this one's Qn): confirmed, as these tests are about the field guards
    const lot: Doc = { ...exampleFor(submit)!, confirmImplausible: true };
    const values = [...(lot.measurements as number[])];
    values[3] = 1e300;
    const json = await request(t.app).post('/v1/lots').set(auth()).send({ ...lot, measurements: values });
    expect([json.status, json.body.errors?.[0]?.pointer], json.text).toEqual([400, '/body/measurements/3']);
    // CSV bypasses the JSON schema: the engine's own bound answers, naming the line
    const csv = 'pack,net_g\n' + values.map((v, i) => `${i + 1},${v}`).join('\n') + '\n';
    const q = `sku=${lot.sku}&lotCode=L-HUGE&lotSize=${lot.lotSize}&testing=${lot.testing}&measurementUnit=${lot.measurementUnit}&measurementBasis=net&column=net_g`;
    const res = await request(t.app).post(`/v1/lots?${q}`).set(auth()).set('Content-Type', 'text/csv').send(csv);
    expect(res.status, res.text).toBe(422);
    expect(res.body.errors[0]).toMatchObject({ pointer: '/body', line: 5 });
    expect(res.body.code).toBe('measurement-out-of-range');
  });

  it('JSON nested thousands deep is a 400, not an exhausted stack', async () => {
    const record = `${'{"a":'.repeat(3000)}1${'}'.repeat(3000)}`;
    const res = await request(t.app).post('/v1/seals/verify').set(auth()).set('Content-Type', 'application/json')
      .send(`{"format":"lotproof.sealed-verdict/1","kid":"k","seal":"${'a'.repeat(64)}","signature":"s","record":${record}}`);
    expect(res.status, res.text.slice(0, 300)).toBe(400);
    expect(res.body.errors[0].pointer).toMatch(/^\/body\/record\/a\/a/);
    expect(res.body.errors[0].detail).toMatch(/nested deeper than 64 levels/);
  });

  it('the sweeps above checked the name in many refusals (they cannot pass by checking none)', () => {
    expect(namedRefusals).toBeGreaterThan(100);
  });
});
