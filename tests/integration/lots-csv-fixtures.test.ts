// POST /v1/lots with a text/csv body on the fixtures of tests/fixtures/csv: the same outcome as the
// shared reader and the console (outcomes.json) — the values sealed in the record, what was read
// (delimiter, decimal separator, rows, blank lines) in the record's `lot.source`, or a 400 problem
// naming the CSV line and the query parameter to choose; nothing stored for a refusal.
import request from 'supertest';
import { QueryTypes } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createProduct } from '../support/lots';
import { CSV_CASES, type CsvCase } from '../fixtures/csv/cases';
import { fixtureBytes } from '../fixtures/csv/fixture-bytes';

let t: TestApp;
let key: string;
let orgId: string;
let net: { id: string; sku: string };
let gross: { id: string; sku: string };

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('CSV fixtures packer (test)');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write']);
  net = await createProduct(t.app, key, { sku: 'T-CSV-NET-500' });
  gross = await createProduct(t.app, key, { sku: 'T-CSV-GROSS-500', tareMode: 'per-pack', tareUnit: 'g' });
});
afterAll(() => t.close());

const auth = () => ({ Authorization: `Bearer ${key}` });
const verdictCount = async () =>
  (await t.ctx.db.sequelize.query<{ n: number }>('SELECT count(*)::int AS n FROM verdicts WHERE organisation_id = $1', { bind: [orgId], type: QueryTypes.SELECT }))[0]!.n;

function lotQuery(c: CsvCase, i: number): string {
  const perPack = Boolean(c.query.tareColumn);
  const q = new URLSearchParams({
    sku: perPack ? gross.sku : net.sku,
    lotCode: `L-CSV-FIXTURE-${i}`,
    lotSize: '100',
    testing: 'non-destructive',
    measurementUnit: 'g',
    measurementBasis: perPack ? 'gross' : 'net',
  });
  for (const [k, v] of Object.entries(c.query)) q.set(k, v);
  return `/v1/lots?${q}`;
}

describe('POST /v1/lots (text/csv) on the CSV fixtures', () => {
  it.each(CSV_CASES.map((c, i) => [c.name, c, i] as const))('%s', async (_name, c, i) => {
    const before = await verdictCount();
    const res = await request(t.app).post(lotQuery(c, i)).set(auth()).set('Content-Type', 'text/csv').send(Buffer.from(fixtureBytes(c.file)));
    if (c.read) {
      expect(res.status, JSON.stringify(res.body)).toBe(201);
      expect(res.body.lot.measurementCount).toBe(c.read.measurements.length);
      const sealed = await request(t.app).get(`/v1/seals/${res.body.seal.value}`).set(auth());
      expect(sealed.status, JSON.stringify(sealed.body)).toBe(200);
      const record = sealed.body.document.record;
      expect(record.input.lot.measurements, c.why).toEqual(c.read.measurements);
      if (c.read.tares) expect(record.input.lot.tares, c.why).toEqual(c.read.tares);
      expect(record.lot.source, c.why).toMatchObject({
        format: 'csv',
        column: c.query.column,
        delimiter: c.read.delimiter,
        decimal: c.read.decimal,
        rowsRead: c.read.measurements.length,
        blankLines: { count: c.read.blankLines.length, lines: c.read.blankLines },
      });
      return;
    }
    const r = c.refused!;
    expect(res.status, JSON.stringify(res.body)).toBe(400);
    expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
    expect(res.body.errors[0].pointer, JSON.stringify(res.body)).toBe(r.param ? `/query/${r.param}` : '/body');
    if (r.line !== null) {
      expect(res.body.line).toBe(r.line);
      expect(res.body.detail).toMatch(new RegExp(`^CSV line ${r.line}: `));
    }
    expect(res.body.detail).toContain(r.says);
    expect(res.body.choose ?? {}).toEqual(r.choose);
    expect(await verdictCount()).toBe(before);
  });

  it('refuses a delimiter or decimal separator it does not know, naming the parameter', async () => {
    for (const [param, value] of [['delimiter', 'pipe'], ['decimal', 'dot']] as const) {
      const c = { ...CSV_CASES[0]!, query: { column: 'net_g', [param]: value } } as unknown as CsvCase;
      const res = await request(t.app).post(lotQuery(c, 900)).set(auth()).set('Content-Type', 'text/csv').send(Buffer.from(fixtureBytes(c.file)));
      expect(res.status, JSON.stringify(res.body)).toBe(400);
      expect(res.body.errors.map((e: { pointer: string }) => e.pointer)).toContain(`/query/${param}`);
    }
  });
});
