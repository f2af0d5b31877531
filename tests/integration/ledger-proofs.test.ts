// The ledger's Merkle tree over HTTP: checkpoints (issued on demand, listed, read, signed as
// clients/verifier/FORMAT.md says), inclusion and consistency proofs that equal an independent naive
// implementation of RFC 9162 (tests/unit/merkle-naive.ts), problems naming the bad field, tenant
// isolation, the range check finding a changed tree node or record, and background walks.
import { createPublicKey, verify } from 'node:crypto';
import canonicalize from 'canonicalize';
import pg from 'pg';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { walkEnded } from '../../server/ledger/walks';
import { buildTestApp, createTestKey, createTestOrganisation, testSuperuserUrl, type TestApp } from '../support/app';
import { createProduct, lotBody } from '../support/lots';
import { naiveTree } from '../unit/merkle-naive';

let t: TestApp;

beforeAll(() => {
  t = buildTestApp();
});
afterAll(() => t.close());

interface Org {
  id: string;
  key: string;
  auth: { Authorization: string };
  sku: string;
}
async function newOrg(name: string): Promise<Org> {
  const org = await createTestOrganisation(name);
  const key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  const product = await createProduct(t.app, key);
  return { id: org.id, key, auth: { Authorization: `Bearer ${key}` }, sku: product.sku };
}
async function submit(o: Org, n: number, seed: number): Promise<void> {
  for (let i = 0; i < n; i++) {
    const res = await request(t.app).post('/v1/lots').set(o.auth).send(lotBody(o.sku, seed + i));
    expect(res.status, JSON.stringify(res.body)).toBe(201);
  }
}
/** The seals in ledger order, read straight from the table: the leaf inputs (FORMAT.md, "The tree"). */
async function seals(o: Org): Promise<Buffer[]> {
  const [rows] = await t.ctx.db.sequelize.query('SELECT seal FROM verdicts WHERE organisation_id = $1 ORDER BY sequence', { bind: [o.id] });
  return (rows as { seal: string }[]).map((r) => Buffer.from(r.seal, 'hex'));
}
const hex = (bs: Buffer[]) => bs.map((b) => b.toString('hex'));

function expectProblem(res: request.Response, status: number, pointer: string) {
  expect(res.status, JSON.stringify(res.body)).toBe(status);
  expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
  expect((res.body.errors ?? []).map((e: { pointer: string }) => e.pointer), JSON.stringify(res.body)).toContain(pointer);
}

/** FORMAT.md: Ed25519 over the RFC 8785 canonical JSON (the `canonicalize` package) of the checkpoint without its signature. */
async function checkpointSignatureVerifies(c: Record<string, unknown>): Promise<boolean> {
  const jwks = (await request(t.app).get('/.well-known/jwks.json')).body as { keys: { kid: string; kty: string; crv: string; x: string }[] };
  const jwk = jwks.keys.find((k) => k.kid === c.kid);
  if (!jwk) return false;
  const { signature, ...unsigned } = c;
  const key = createPublicKey({ key: { kty: jwk.kty, crv: jwk.crv, x: jwk.x }, format: 'jwk' });
  return verify(null, Buffer.from(canonicalize(unsigned)!, 'utf8'), key, Buffer.from(String(signature), 'base64url'));
}

describe('checkpoints and proofs', () => {
  let a: Org;
  const sizes = [1, 5, 8, 13];

  beforeAll(async () => {
    a = await newOrg('Merkle packer');
    // An empty ledger has no checkpoint.
    expect((await request(t.app).post('/v1/ledger/checkpoints').set(a.auth)).status).toBe(404);
    expect((await request(t.app).get('/v1/ledger/checkpoints/latest').set(a.auth)).status).toBe(404);
    let done = 0;
    for (const size of sizes) {
      await submit(a, size - done, 100 + done);
      done = size;
      const res = await request(t.app).post('/v1/ledger/checkpoints').set(a.auth);
      expect(res.status, JSON.stringify(res.body)).toBe(201);
      expect(res.body.treeSize).toBe(size);
      expect(res.headers.location).toBe(`/v1/ledger/checkpoints/${size}`);
    }
  }, 120_000);

  it('issues nothing new when nothing was appended (200 with the latest), lists newest first with a cursor, reads by size', async () => {
    const again = await request(t.app).post('/v1/ledger/checkpoints').set(a.auth);
    expect(again.status).toBe(200);
    expect(again.body.treeSize).toBe(13);
    // Each checkpoint issued on request is in the audit trail with who asked; the 200 above issued none.
    const audit = await request(t.app).get('/v1/audit-events').query({ action: 'checkpoint.issued', limit: 50 }).set(a.auth);
    expect(audit.status, audit.text).toBe(200);
    expect(audit.body.items.map((e: { details: { treeSize: number } }) => e.details.treeSize).sort((x: number, y: number) => x - y)).toEqual(sizes);
    expect(audit.body.items[0]).toMatchObject({ actor: { kind: 'api-key' }, target: null, details: { rootHash: expect.stringMatching(/^[0-9a-f]{64}$/) } });
    const latest = await request(t.app).get('/v1/ledger/checkpoints/latest').set(a.auth);
    expect(latest.body).toEqual(again.body);

    const page1 = await request(t.app).get('/v1/ledger/checkpoints?limit=3').set(a.auth);
    expect(page1.body.items.map((c: { treeSize: number }) => c.treeSize)).toEqual([13, 8, 5]);
    const page2 = await request(t.app).get(`/v1/ledger/checkpoints?limit=3&cursor=${page1.body.nextCursor}`).set(a.auth);
    expect(page2.body.items.map((c: { treeSize: number }) => c.treeSize)).toEqual([1]);
    expect(page2.body.nextCursor).toBeNull();
    expectProblem(await request(t.app).get('/v1/ledger/checkpoints?cursor=bogus').set(a.auth), 400, '/query/cursor');

    const five = await request(t.app).get('/v1/ledger/checkpoints/5').set(a.auth);
    expect(five.status).toBe(200);
    expect(five.body).toEqual(page1.body.items[2]);
    expectProblem(await request(t.app).get('/v1/ledger/checkpoints/6').set(a.auth), 404, '/path/treeSize');
    // (the request validator names a path parameter /params/…)
    expectProblem(await request(t.app).get('/v1/ledger/checkpoints/0').set(a.auth), 400, '/params/treeSize');
  });

  it('signs each checkpoint as FORMAT.md says, over the root of the naive RFC 9162 tree of the seals', async () => {
    const tree = naiveTree(await seals(a));
    const all = (await request(t.app).get('/v1/ledger/checkpoints').set(a.auth)).body.items as Record<string, unknown>[];
    expect(all).toHaveLength(sizes.length);
    for (const c of all) {
      expect(Object.keys(c).sort()).toEqual(['format', 'issuedAt', 'kid', 'organisationId', 'rootHash', 'signature', 'treeSize']);
      expect(c.format).toBe('lotproof.checkpoint/1');
      expect(c.organisationId).toBe(a.id);
      expect(c.issuedAt).toBe(new Date(String(c.issuedAt)).toISOString());
      expect(c.rootHash, `root of ${c.treeSize}`).toBe(tree.mth(Number(c.treeSize)).toString('hex'));
      expect(await checkpointSignatureVerifies(c)).toBe(true);
      expect(await checkpointSignatureVerifies({ ...c, treeSize: Number(c.treeSize) + 1 })).toBe(false);
    }
  });

  it('serves inclusion proofs equal to PATH(m, D[n]) of the naive implementation, by seal and by verdict id', async () => {
    const leaves = await seals(a);
    const tree = naiveTree(leaves);
    for (let m = 0; m < leaves.length; m++) {
      const bySeal = await request(t.app).get(`/v1/ledger/proofs/inclusion?seal=${leaves[m]!.toString('hex')}`).set(a.auth);
      expect(bySeal.status, JSON.stringify(bySeal.body)).toBe(200);
      expect(bySeal.body.checkpoint.treeSize).toBe(13);
      expect(bySeal.body.proof).toEqual({ leafIndex: m, treeSize: 13, hashes: hex(tree.pathOf(m, 13)) });
      expect(bySeal.body.verdict.sequence).toBe(m + 1);
      for (const n of sizes.filter((s) => s > m)) {
        const res = await request(t.app).get(`/v1/ledger/proofs/inclusion?verdictId=${bySeal.body.verdict.id}&treeSize=${n}`).set(a.auth);
        expect(res.body.proof, `${m} in ${n}`).toEqual({ leafIndex: m, treeSize: n, hashes: hex(tree.pathOf(m, n)) });
        expect(res.body.checkpoint.rootHash).toBe(tree.mth(n).toString('hex'));
      }
    }
  });

  it('serves consistency proofs equal to PROOF(m, D[n]) between every pair of checkpoints', async () => {
    const tree = naiveTree(await seals(a));
    for (const m of sizes) {
      for (const n of sizes.filter((s) => s >= m)) {
        const res = await request(t.app).get(`/v1/ledger/proofs/consistency?fromSize=${m}&toSize=${n}`).set(a.auth);
        expect(res.status, JSON.stringify(res.body)).toBe(200);
        expect(res.body.proof, `${m} → ${n}`).toEqual({ fromSize: m, toSize: n, hashes: hex(tree.proofOf(m, n)) });
        expect(res.body.from.treeSize).toBe(m);
        expect(res.body.to.treeSize).toBe(n);
      }
    }
    const toLatest = await request(t.app).get('/v1/ledger/proofs/consistency?fromSize=5').set(a.auth);
    expect(toLatest.body.proof).toEqual({ fromSize: 5, toSize: 13, hashes: hex(tree.proofOf(5, 13)) });
  });

  it('refuses bad and unknown sizes, seals and ids with a problem naming the field', async () => {
    const [first] = await seals(a);
    const p = (q: string) => request(t.app).get(`/v1/ledger/proofs/${q}`).set(a.auth);
    expectProblem(await p(`inclusion?seal=${'ab'.repeat(32)}`), 404, '/query/seal');
    expectProblem(await p('inclusion?verdictId=00000000-0000-4000-8000-000000000000'), 404, '/query/verdictId');
    expectProblem(await p('inclusion?seal=xyz'), 400, '/query/seal');
    expectProblem(await p('inclusion'), 400, '/query/seal');
    expectProblem(await p(`inclusion?seal=${first!.toString('hex')}&verdictId=00000000-0000-4000-8000-000000000000`), 400, '/query/verdictId');
    expectProblem(await p(`inclusion?seal=${first!.toString('hex')}&treeSize=7`), 404, '/query/treeSize');
    const last = (await seals(a))[12]!;
    expectProblem(await p(`inclusion?seal=${last.toString('hex')}&treeSize=8`), 400, '/query/treeSize');
    expectProblem(await p('consistency?fromSize=6'), 404, '/query/fromSize');
    expectProblem(await p('consistency?fromSize=5&toSize=9'), 404, '/query/toSize');
    expectProblem(await p('consistency?fromSize=8&toSize=5'), 400, '/query/fromSize');
    expectProblem(await p('consistency?fromSize=0'), 400, '/query/fromSize');
    expectProblem(await p('consistency'), 400, '/query/fromSize');
    expectProblem(await request(t.app).get('/v1/ledger/verify?to=14').set(a.auth), 400, '/query/to');
    expectProblem(await request(t.app).get('/v1/ledger/verify?from=9&to=3').set(a.auth), 400, '/query/from');
  });

  it("keeps each organisation's tree to itself: another's seal is 404 and its checkpoints are invisible", async () => {
    const b = await newOrg('Other Merkle packer');
    const [first] = await seals(a);
    const as = (path: string) => request(t.app).get(path).set(b.auth);
    expectProblem(await as(`/v1/ledger/proofs/inclusion?seal=${first!.toString('hex')}`), 404, '/query/seal');
    expect((await as('/v1/ledger/checkpoints')).body.items).toEqual([]);
    expect((await as('/v1/ledger/checkpoints/latest')).status).toBe(404);
    expectProblem(await as('/v1/ledger/checkpoints/13'), 404, '/path/treeSize');
    expectProblem(await as('/v1/ledger/proofs/consistency?fromSize=5&toSize=13'), 404, '/query/fromSize');
    expect((await as('/v1/ledger/verify')).body).toMatchObject({ intact: true, verdictsChecked: 0, checkpoint: null });
    // Its own tree starts at its own first verdict.
    await submit(b, 2, 900);
    const own = await request(t.app).post('/v1/ledger/checkpoints').set(b.auth);
    expect(own.status).toBe(201);
    expect(own.body.treeSize).toBe(2);
    expect(own.body.rootHash).toBe(naiveTree(await seals(b)).mth(2).toString('hex'));
  });

  it('issues a checkpoint covering a verdict appended since the latest when a proof of it is asked for', async () => {
    await submit(a, 1, 200);
    const leaves = await seals(a);
    const res = await request(t.app).get(`/v1/ledger/proofs/inclusion?seal=${leaves[13]!.toString('hex')}`).set(a.auth);
    expect(res.status).toBe(200);
    expect(res.body.checkpoint.treeSize).toBe(14);
    expect(res.body.proof.hashes).toEqual(hex(naiveTree(leaves).pathOf(13, 14)));
    expect(await checkpointSignatureVerifies(res.body.checkpoint)).toBe(true);
  });
});

describe('the range check and walks', () => {
  let c: Org;
  let su: pg.Client;

  beforeAll(async () => {
    c = await newOrg('Checked packer');
    await submit(c, 12, 300);
    su = new pg.Client({ connectionString: testSuperuserUrl() });
    await su.connect();
  }, 120_000);
  afterAll(() => su.end());

  /** Plays the database administrator: changes a row of an append-only table with its triggers off. */
  async function tamper(sql: string, bind: unknown[]) {
    await su.query('BEGIN');
    await su.query("SET LOCAL session_replication_role = 'replica'");
    const r = await su.query(sql, bind);
    await su.query('COMMIT');
    expect(r.rowCount).toBe(1);
  }

  it('checks the newest range against a fresh checkpoint: intact, signature valid, consistent with the one before', async () => {
    const first = await request(t.app).get('/v1/ledger/verify').set(c.auth);
    expect(first.status).toBe(200);
    expect(first.body).toMatchObject({ intact: true, verdictsChecked: 12, from: 1, to: 12, firstBreak: null, signatureValid: true, rootMatches: true, consistentWithPrevious: null, findings: [] });
    expect(first.body.checkpoint.treeSize).toBe(12);
    await submit(c, 3, 400);
    const second = await request(t.app).get('/v1/ledger/verify?from=4&to=10').set(c.auth);
    expect(second.body).toMatchObject({ intact: true, verdictsChecked: 7, from: 4, to: 10, rootMatches: true, consistentWithPrevious: true, previousTreeSize: 12 });
    expect(second.body.checkpoint.treeSize).toBe(15);
    expect(second.body.head.sequence).toBe(10);
  }, 60_000);

  it('finds a changed stored tree node inside the range, and one outside it through the root', async () => {
    // Leaf 5 (position 6) changed in the store: inside the range 6..8, the stored node differs from its seal.
    await tamper("UPDATE ledger_tree_nodes SET hash = sha256('forged') WHERE organisation_id = $1 AND level = 0 AND idx = 5", [c.id]);
    const inside = await request(t.app).get('/v1/ledger/verify?from=6&to=8').set(c.auth);
    expect(inside.body.intact).toBe(false);
    expect(inside.body.rootMatches).toBe(false);
    expect(inside.body.firstBreak).toBeNull();
    // The node covering leaves 0..7 (level 3, index 0) changed: a range elsewhere reads it for the root.
    await tamper("UPDATE ledger_tree_nodes SET hash = sha256('forged too') WHERE organisation_id = $1 AND level = 3 AND idx = 0", [c.id]);
    const outside = await request(t.app).get('/v1/ledger/verify?from=9&to=15').set(c.auth);
    expect(outside.body.intact).toBe(false);
    expect(outside.body.rootMatches).toBe(false);
    expect(outside.body.findings.join(' ')).toMatch(/root/);
  });

  it('finds a changed record in the range, and a walk finds it too', async () => {
    const d = await newOrg('Walked packer');
    await submit(d, 9, 500);
    const start = await request(t.app).post('/v1/ledger/walks').set(d.auth);
    expect(start.status).toBe(202);
    expect(start.headers.location).toBe(`/v1/ledger/walks/${start.body.id}`);
    expect(start.body).toMatchObject({ treeSize: 9, total: 9 });
    await walkEnded(start.body.id);
    const done = await request(t.app).get(`/v1/ledger/walks/${start.body.id}`).set(d.auth);
    expect(done.body).toMatchObject({ status: 'finished', checked: 9, total: 9, intact: true, firstBreak: null, findings: [] });

    await tamper(`UPDATE verdicts SET record = replace(record, '"decision":"conforming"', '"decision":"nonconforming"') WHERE organisation_id = $1 AND sequence = 4`, [d.id]);
    const check = await request(t.app).get('/v1/ledger/verify').set(d.auth);
    expect(check.body.intact).toBe(false);
    expect(check.body.firstBreak).toMatchObject({ sequence: 4, reason: expect.stringMatching(/hash/) });
    expect(check.body.verdictsChecked).toBe(3);
    const walk = await request(t.app).post('/v1/ledger/walks').set(d.auth);
    await walkEnded(walk.body.id);
    const broken = await request(t.app).get(`/v1/ledger/walks/${walk.body.id}`).set(d.auth);
    expect(broken.body).toMatchObject({ status: 'finished', checked: 3, intact: false, firstBreak: { sequence: 4 } });

    const walksAudited = await request(t.app).get('/v1/audit-events').query({ action: 'ledger.walk-started' }).set(d.auth);
    expect(walksAudited.body.items.map((e: { target: { id: string } }) => e.target.id).sort()).toEqual([start.body.id, walk.body.id].sort());
    // Another organisation cannot see the walk.
    expect((await request(t.app).get(`/v1/ledger/walks/${walk.body.id}`).set(c.auth)).status).toBe(404);
  }, 60_000);

  it('shows a walk whose process stopped beating as interrupted', async () => {
    const id = '11111111-2222-4333-8444-555555555555';
    await t.ctx.db.sequelize.query(
      `INSERT INTO ledger_walks (id, organisation_id, status, tree_size, checked, total, started_at, heartbeat_at)
       VALUES ($1, $2, 'running', 100, 40, 100, now() - interval '5 minutes', now() - interval '2 minutes')`,
      { bind: [id, c.id] },
    );
    const res = await request(t.app).get(`/v1/ledger/walks/${id}`).set(c.auth);
    expect(res.body).toMatchObject({ status: 'interrupted', checked: 40, total: 100, intact: null });
  });
});
