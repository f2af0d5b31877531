// Issue 16, "Finding lots": the verdict list filters by packing date and by sealing date (each its
// own parameter), searches lot code and line in part and in any case (ILIKE, the user's % and _ taken
// literally), takes a line of "Line 1 (demo)" as sent by any client (reserved characters unencoded:
// RFC 3986 §3.4 allows "(" and ")" in a query), filters by withdrawal status, and gives summary
// counts for the filter in force. Every query is of the caller's organisation only.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createProduct, lotBody, measurements } from '../support/lots';

let t: TestApp;
let key: string;
let otherKey: string;
const ids: Record<string, string> = {};

const bearer = (k: string) => ({ Authorization: `Bearer ${k}` });
const list = (query: string, k = key) => request(t.app).get(`/v1/verdicts?${/(^|&)limit=/.test(query) ? '' : 'limit=100&'}${query}`).set(bearer(k));
const codes = (res: request.Response) => (res.body.items as { lot: { lotCode: string } }[]).map((v) => v.lot.lotCode).sort();

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Finding packer (test)');
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  const sku = (await createProduct(t.app, key, { sku: 'T-FIND-500' })).sku;
  const lots: [string, string | undefined, string, Record<string, unknown>][] = [
    ['FLT-Alpha-1', 'Line 1 (demo)', '2025-03-01T06:00:00Z', {}],
    ['flt-alpha-2', 'Line 2', '2025-03-05T06:00:00Z', {}],
    ['FLT-BETA_3', 'line 1 (DEMO)', '2025-03-10T06:00:00Z', {}],
    ['FLT-100%', 'Line 3', '2025-04-01T06:00:00Z', {}],
    // Nonconforming: mean far below Qn (Directive 76/211/EEC Annex II 4: the mean criterion fails).
    ['FLT-LOW', 'Line 2', '2025-04-02T06:00:00Z', { measurements: measurements(61, 50, 470, 2) }],
    // Second sample required: lot 100–500, first sample 30, 2 defectives below Qn − TNE (Annex II 2.2.1, accept ≤ 1, reject ≥ 3).
    ['FLT-TWICE', 'Line 2', '2025-04-03T06:00:00Z', { lotSize: 400, measurements: [...measurements(62, 28, 504, 1.5), 480.0, 481.0] }],
  ];
  for (const [i, [lotCode, line, packedAt, extra]] of lots.entries()) {
    const res = await request(t.app).post('/v1/lots').set(bearer(key)).send({ ...lotBody(sku, 600 + i), lotCode, line, packedAt, ...extra });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    ids[lotCode] = res.body.id;
  }
  expect((await request(t.app).get(`/v1/verdicts/${ids['FLT-LOW']}`).set(bearer(key))).body.decision).toBe('nonconforming');
  expect((await request(t.app).get(`/v1/verdicts/${ids['FLT-TWICE']}`).set(bearer(key))).body.decision).toBe('second-sample-required');
  const wd = await request(t.app).post(`/v1/verdicts/${ids['flt-alpha-2']}/withdrawal`).set(bearer(key)).send({ reason: 'Weighed on the wrong scale (test)' });
  expect(wd.status).toBe(201);

  // Another organisation with look-alike lots: never seen by the first.
  const other = await createTestOrganisation('Other finding packer (test)');
  otherKey = await createTestKey(other.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  const otherSku = (await createProduct(t.app, otherKey, { sku: 'T-FIND-OTHER' })).sku;
  const o = await request(t.app).post('/v1/lots').set(bearer(otherKey)).send({ ...lotBody(otherSku, 700), lotCode: 'FLT-Alpha-9', line: 'Line 1 (demo)' });
  expect(o.status).toBe(201);
}, 120_000);
afterAll(() => t.close());

describe('lot code and line search', () => {
  it('finds part of a lot code in any case', async () => {
    expect(codes(await list('lotCode=alpha'))).toEqual(['FLT-Alpha-1', 'flt-alpha-2']);
    expect(codes(await list('lotCode=FLT-ALPHA-1'))).toEqual(['FLT-Alpha-1']);
    expect(codes(await list('lotCode=nothing-like-it'))).toEqual([]);
  });

  it('takes % and _ literally (escaped wildcards)', async () => {
    expect(codes(await list(`lotCode=${encodeURIComponent('_')}`))).toEqual(['FLT-BETA_3']);
    expect(codes(await list(`lotCode=${encodeURIComponent('%')}`))).toEqual(['FLT-100%']);
    expect(codes(await list(`lotCode=${encodeURIComponent('A_')}`))).toEqual(['FLT-BETA_3']);
  });

  it('answers a line of "Line 1 (demo)" however a client encodes it, in part and any case', async () => {
    // encodeURIComponent leaves ( ) unencoded (ECMA-262 §19.2.6.5, its unreserved set), as openapi-fetch sends it
    const raw = await list(`line=${encodeURIComponent('Line 1 (demo)')}`);
    expect(raw.status, JSON.stringify(raw.body)).toBe(200);
    expect(codes(raw)).toEqual(['FLT-Alpha-1', 'FLT-BETA_3']);
    // URLSearchParams percent-encodes them (WHATWG URL, application/x-www-form-urlencoded serializer)
    const encoded = await list(new URLSearchParams({ line: 'Line 1 (demo)' }).toString());
    expect(codes(encoded)).toEqual(['FLT-Alpha-1', 'FLT-BETA_3']);
    expect(codes(await list('line=2'))).toEqual(['FLT-LOW', 'FLT-TWICE', 'flt-alpha-2']);
    // the same for exports (one filter for both)
    const csv = await request(t.app).get(`/v1/exports/verdicts?format=csv&line=${encodeURIComponent('(demo)')}`).set(bearer(key));
    expect(csv.status).toBe(200);
    expect(csv.text.trim().split('\r\n')).toHaveLength(3);
  });
});

describe('packing date and sealing date', () => {
  it('are separate filters', async () => {
    expect(codes(await list('packedFrom=2025-03-05T00:00:00Z&packedTo=2025-04-01T00:00:00Z'))).toEqual(['FLT-BETA_3', 'flt-alpha-2']);
    expect(codes(await list('packedFrom=2025-04-01T06:00:00Z'))).toEqual(['FLT-100%', 'FLT-LOW', 'FLT-TWICE']);
    // all were sealed today: a sealing range of last year holds none, one from yesterday holds all
    expect(codes(await list('sealedTo=2025-12-31T00:00:00Z'))).toEqual([]);
    const yesterday = new Date(Date.now() - 86_400_000).toISOString();
    expect(codes(await list(`sealedFrom=${yesterday}`))).toHaveLength(6);
    // `from`/`to` stay the sealing date's older names
    expect(codes(await list('to=2025-12-31T00:00:00Z'))).toEqual([]);
  });

  it('refuses a range that ends before it starts, naming its end', async () => {
    const res = await list('packedFrom=2025-04-01T00:00:00Z&packedTo=2025-03-01T00:00:00Z');
    expect(res.status).toBe(400);
    expect(res.body.errors.map((e: { pointer: string }) => e.pointer), JSON.stringify(res.body)).toContain('/query/packedTo');
    const bad = await list('sealedFrom=not-a-date');
    expect(bad.status).toBe(400);
    expect(bad.body.errors.map((e: { pointer: string }) => e.pointer)).toContain('/query/sealedFrom');
  });
});

describe('summary counts', () => {
  it('count the filter in force, withdrawn apart from the decisions', async () => {
    const all = await list('counts=true&limit=2');
    expect(all.status).toBe(200);
    expect(all.body.items).toHaveLength(2); // the counts are of every page, not this one
    expect(all.body.counts).toEqual({ total: 6, conforming: 3, nonconforming: 1, awaitingSecondSample: 1, insufficientData: 0, withdrawn: 1 });
    const line2 = await list('counts=true&line=line%202');
    expect(line2.body.counts).toEqual({ total: 3, conforming: 0, nonconforming: 1, awaitingSecondSample: 1, insufficientData: 0, withdrawn: 1 });
    expect((await list('lotCode=alpha')).body.counts).toBeUndefined();
  });

  it('a first sample whose second sample is sealed no longer awaits one', async () => {
    const second = await request(t.app).post('/v1/lots').set(bearer(key)).send({
      sku: 'T-FIND-500', measurementUnit: 'g', measurementBasis: 'net', firstSampleVerdictId: ids['FLT-TWICE'], measurements: measurements(63, 30, 504, 1.5),
    });
    expect(second.status, JSON.stringify(second.body)).toBe(201);
    const c = (await list('counts=true&lotCode=TWICE')).body.counts;
    expect(c.awaitingSecondSample).toBe(0);
    expect(c.total).toBe(2);
  });

  it('filter by status', async () => {
    expect(codes(await list('status=withdrawn'))).toEqual(['flt-alpha-2']);
    expect(codes(await list('status=not-withdrawn&lotCode=alpha'))).toEqual(['FLT-Alpha-1']);
  });
});

describe('tenant isolation', () => {
  it("never lists or counts another organisation's lots", async () => {
    expect(codes(await list('lotCode=alpha'))).not.toContain('FLT-Alpha-9');
    const theirs = await list('counts=true&line=demo', otherKey);
    expect(codes(theirs)).toEqual(['FLT-Alpha-9']);
    expect(theirs.body.counts).toMatchObject({ total: 1, withdrawn: 0 });
    expect((await list('status=withdrawn', otherKey)).body.items).toEqual([]);
  });
});
