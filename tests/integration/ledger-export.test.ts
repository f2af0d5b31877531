// NDJSON export v2 (clients/verifier/FORMAT.md, "NDJSON export"): a canonical header naming a signed
// checkpoint, then every position up to it with an inclusion proof equal to PATH(m, D[n]) of the
// naive RFC 9162 implementation (tests/unit/merkle-naive.ts); from a pinned checkpoint with
// fromSize; a filtered export is partial and names its filter; bad fromSize values are problems.
import canonicalize from 'canonicalize';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createProduct, lotBody, measurements } from '../support/lots';
import { naiveTree } from '../unit/merkle-naive';

let t: TestApp;
let auth: { Authorization: string };
let orgId: string;
let sku: string;

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Exporting packer');
  orgId = org.id;
  const key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  auth = { Authorization: `Bearer ${key}` };
  sku = (await createProduct(t.app, key)).sku;
  // Every third lot underfilled, so a decision filter leaves some out.
  for (let i = 0; i < 11; i++) {
    const res = await request(t.app).post('/v1/lots').set(auth).send(lotBody(sku, 700 + i, { measurements: measurements(700 + i, 50, i % 3 === 0 ? 470 : 503, 2) }));
    expect(res.status).toBe(201);
  }
}, 120_000);
afterAll(() => t.close());

async function ndjson(query: string): Promise<{ status: number; lines: string[]; body: unknown }> {
  const res = await request(t.app).get(`/v1/exports/verdicts?format=ndjson${query}`).set(auth).buffer(true).parse((r, cb) => {
    let s = '';
    r.on('data', (c: Buffer) => (s += c.toString('utf8')));
    r.on('end', () => cb(null, s));
  });
  const text = res.body as string;
  return { status: res.status, lines: res.status === 200 ? text.split('\n').filter((l) => l !== '') : [], body: res.status === 200 ? null : JSON.parse(text) };
}
async function leaves(): Promise<Buffer[]> {
  const [rows] = await t.ctx.db.sequelize.query('SELECT seal FROM verdicts WHERE organisation_id = $1 ORDER BY sequence', { bind: [orgId] });
  return (rows as { seal: string }[]).map((r) => Buffer.from(r.seal, 'hex'));
}

describe('NDJSON export v2', () => {
  it('a complete export: a canonical header, then positions 1..treeSize, each line canonical with its proof', async () => {
    const { status, lines } = await ndjson('');
    expect(status).toBe(200);
    const header = JSON.parse(lines[0]!);
    // Every line is its own RFC 8785 canonical form (the `canonicalize` package, an independent implementation).
    for (const l of lines) expect(canonicalize(JSON.parse(l))).toBe(l);
    expect(header).toEqual({
      checkpoint: expect.objectContaining({ format: 'lotproof.checkpoint/1', organisationId: orgId, treeSize: 11 }),
      complete: true,
      filter: null,
      format: 'lotproof.export/2',
      from: 1,
      organisationId: orgId,
      to: 11,
    });
    const tree = naiveTree(await leaves());
    expect(header.checkpoint.rootHash).toBe(tree.mth(11).toString('hex'));
    const docs = lines.slice(1).map((l) => JSON.parse(l));
    expect(docs.map((d) => d.record.sequence)).toEqual([...Array(11).keys()].map((i) => i + 1));
    for (const d of docs) {
      expect(Object.keys(d)).toEqual(['format', 'inclusion', 'kid', 'record', 'seal', 'signature']);
      const m = d.record.sequence - 1;
      expect(d.inclusion).toEqual({ leafIndex: m, treeSize: 11, hashes: tree.pathOf(m, 11).map((h) => h.toString('hex')) });
    }
  });

  it('holds only positions up to its checkpoint, and from a pinned checkpoint with fromSize', async () => {
    // A checkpoint at 11 is pinned; two more lots; the next export issues one at 13.
    for (let i = 0; i < 2; i++) expect((await request(t.app).post('/v1/lots').set(auth).send(lotBody(sku, 800 + i))).status).toBe(201);
    const { lines } = await ndjson('&fromSize=11');
    const header = JSON.parse(lines[0]!);
    expect(header).toMatchObject({ complete: true, filter: null, from: 12, to: 13, checkpoint: { treeSize: 13 } });
    const tree = naiveTree(await leaves());
    const docs = lines.slice(1).map((l) => JSON.parse(l));
    expect(docs.map((d) => d.record.sequence)).toEqual([12, 13]);
    expect(docs[0].inclusion.hashes).toEqual(tree.pathOf(11, 13).map((h) => h.toString('hex')));
  });

  it('a filtered export is partial, names its filter, and proves each member', async () => {
    const { lines } = await ndjson('&decision=nonconforming');
    const header = JSON.parse(lines[0]!);
    expect(header).toMatchObject({ complete: false, filter: { decision: 'nonconforming' }, from: 1, to: header.checkpoint.treeSize });
    const docs = lines.slice(1).map((l) => JSON.parse(l));
    expect(docs.length).toBeGreaterThan(0);
    expect(docs.every((d) => d.record.result.decision === 'nonconforming')).toBe(true);
    const tree = naiveTree(await leaves());
    const n = header.checkpoint.treeSize;
    for (const d of docs) expect(d.inclusion.hashes).toEqual(tree.pathOf(d.record.sequence - 1, n).map((h) => h.toString('hex')));
  });

  it('refuses a fromSize that is no checkpoint, the latest one, or given for CSV, naming the field', async () => {
    const unknown = await ndjson('&fromSize=12');
    expect(unknown.status).toBe(404);
    expect(unknown.body).toMatchObject({ errors: [{ pointer: '/query/fromSize' }] });
    const latest = await ndjson('&fromSize=13');
    expect(latest.status).toBe(422);
    expect(latest.body).toMatchObject({ errors: [{ pointer: '/query/fromSize' }] });
    const csv = await request(t.app).get('/v1/exports/verdicts?format=csv&fromSize=11').set(auth);
    expect(csv.status).toBe(400);
    expect(csv.body.errors[0].pointer).toBe('/query/fromSize');
  });
});
