// Issue 16, "Withdrawal": a sealed, signed withdrawal record appended to the ledger — the next
// position of the same chain, a leaf of the same tree — names the verdict it withdraws, who did it
// and why. The verdict stays as sealed (never an UPDATE) and is marked withdrawn everywhere: its GET,
// the list (status filter), exports (both formats, and the offline verifier), webhooks, the audit
// trail. Once per verdict (409 naming the first), 404 for another organisation's or no verdict,
// idempotent like lots; every refusal stores nothing.
import { createHash, createPublicKey, verify } from 'node:crypto';
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import request from 'supertest';
import { QueryTypes } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import canonicalize from 'canonicalize';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createTestUser, sessionCookieFor } from '../support/identity';
import { createProduct, lotBody } from '../support/lots';

let t: TestApp;
let key: string;
let readerKey: string;
let orgId: string;
let otherKey: string;
let otherVerdictId: string;
let sku: string;

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Withdrawing packer (test)');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read', 'keys:manage']);
  readerKey = await createTestKey(org.id, ['verdicts:read', 'audit:read']);
  sku = (await createProduct(t.app, key, { sku: 'T-WD-500' })).sku;
  const other = await createTestOrganisation('Other packer (test)');
  otherKey = await createTestKey(other.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  const otherSku = (await createProduct(t.app, otherKey, { sku: 'T-WD-OTHER' })).sku;
  const ov = await request(t.app).post('/v1/lots').set(bearer(otherKey)).send(lotBody(otherSku, 9001));
  expect(ov.status).toBe(201);
  otherVerdictId = ov.body.id;
}, 60_000);
afterAll(() => t.close());

const bearer = (k: string) => ({ Authorization: `Bearer ${k}` });
const auth = () => bearer(key);
const withdraw = (id: string, body: unknown, headers: Record<string, string> = {}) =>
  request(t.app).post(`/v1/verdicts/${id}/withdrawal`).set(auth()).set(headers).send(body as object);

async function sql<T extends object>(text: string, bind: unknown[]): Promise<T[]> {
  return t.ctx.db.sequelize.query<T>(text, { bind, type: QueryTypes.SELECT });
}
const withdrawalCount = async (org = orgId) =>
  (await sql<{ n: number }>('SELECT count(*)::int AS n FROM verdict_withdrawals WHERE organisation_id = $1', [org]))[0]!.n;
const auditCount = async () =>
  (await sql<{ n: number }>("SELECT count(*)::int AS n FROM audit_events WHERE organisation_id = $1 AND action = 'verdict.withdrawn'", [orgId]))[0]!.n;

function expectProblem(res: request.Response, status: number, type: string, pointer?: string) {
  expect(res.status, JSON.stringify(res.body)).toBe(status);
  expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
  expect(res.body.type).toBe(`https://lotproof.dev/problems/${type}`);
  if (pointer !== undefined) expect((res.body.errors ?? []).map((e: { pointer: string }) => e.pointer), JSON.stringify(res.body)).toContain(pointer);
}

async function newVerdict(seed: number): Promise<{ id: string; seal: { value: string; sequence: number } }> {
  const res = await request(t.app).post('/v1/lots').set(auth()).send(lotBody(sku, seed));
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  return res.body;
}

describe('withdrawing a verdict', () => {
  it('seals a signed withdrawal at the next position, linked to the seal before it, and leaves the verdict as sealed', async () => {
    const v = await newVerdict(101);
    const [before] = await sql<{ record: string; seal: string }>('SELECT record, seal FROM verdicts WHERE id = $1', [v.id]);
    const reason = 'Lot code mistyped at the scale; re-submitted under the right code (test)';
    const res = await withdraw(v.id, { reason });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    expect(res.headers.location).toBe(`/v1/verdicts/${v.id}`);
    const w = res.body;
    expect(w).toMatchObject({ verdictId: v.id, verdictSeal: v.seal.value, reason, withdrawnBy: { kind: 'api-key', prefix: expect.any(String) } });
    // The chain: the next position after the verdict, linked to its seal (nothing else was appended between).
    expect(w.seal.sequence).toBe(v.seal.sequence + 1);
    expect(w.seal.previousSeal).toBe(v.seal.value);

    // The stored record: its own format, RFC 8785 canonical (the `canonicalize` package), SHA-256 = seal,
    // Ed25519 signature over the seal's 32 bytes by the JWKS key (RFC 8032; RFC 8037 OKP JWK).
    const [row] = await sql<{ record: string }>('SELECT record FROM verdict_withdrawals WHERE id = $1', [w.id]);
    const record = JSON.parse(row!.record);
    expect(record).toMatchObject({ format: 'lotproof.withdrawal-record/1', withdrawalId: w.id, sequence: w.seal.sequence, previousSeal: v.seal.value,
      verdict: { id: v.id, seal: v.seal.value, sequence: v.seal.sequence }, reason, organisation: { id: orgId } });
    expect(canonicalize(record)).toBe(row!.record);
    expect(createHash('sha256').update(row!.record, 'utf8').digest('hex')).toBe(w.seal.value);
    const jwks = (await request(t.app).get('/.well-known/jwks.json')).body as { keys: { kid: string }[] };
    const jwk = jwks.keys.find((k) => k.kid === w.seal.kid)!;
    const publicKey = createPublicKey({ key: jwk as never, format: 'jwk' });
    expect(verify(null, Buffer.from(w.seal.value, 'hex'), publicKey, Buffer.from(w.seal.signature, 'base64url'))).toBe(true);

    // The verdict's row is as it was (the append-only trigger would refuse an UPDATE anyway).
    const [after] = await sql<{ record: string; seal: string }>('SELECT record, seal FROM verdicts WHERE id = $1', [v.id]);
    expect(after).toEqual(before);

    // Its GET shows the withdrawal.
    const got = await request(t.app).get(`/v1/verdicts/${v.id}`).set(bearer(readerKey));
    expect(got.status).toBe(200);
    expect(got.body.withdrawal).toEqual({ id: w.id, reason, withdrawnBy: w.withdrawnBy, recordedAt: w.recordedAt, seal: w.seal.value, sequence: w.seal.sequence });

    // The next verdict follows the withdrawal in the chain.
    const next = await newVerdict(102);
    expect(next.seal.sequence).toBe(w.seal.sequence + 1);
    expect((next.seal as unknown as { previousSeal: string }).previousSeal).toBe(w.seal.value);
    const chain = await request(t.app).get('/v1/ledger/verify').set(auth());
    expect(chain.status).toBe(200);
    expect(chain.body.intact, JSON.stringify(chain.body.findings)).toBe(true);
  });

  it('is refused a second time with a 409 naming the first withdrawal, and stores nothing', async () => {
    const v = await newVerdict(111);
    const first = await withdraw(v.id, { reason: 'Wrong product picked at the line (test)' });
    expect(first.status).toBe(201);
    const [n, audits] = [await withdrawalCount(), await auditCount()];
    const again = await withdraw(v.id, { reason: 'Another reason (test)' });
    expectProblem(again, 409, 'verdict-already-withdrawn', '/path/verdictId');
    expect(again.body.withdrawal).toMatchObject({ id: first.body.id, reason: 'Wrong product picked at the line (test)', href: `/v1/verdicts/${v.id}` });
    expect(again.body.detail).toContain(first.body.id);
    expect(await withdrawalCount()).toBe(n);
    expect(await auditCount()).toBe(audits);
  });

  it("answers 404 for an unknown verdict and for another organisation's, naming the path, and stores nothing", async () => {
    const n = await withdrawalCount();
    const unknown = await withdraw('00000000-0000-4000-8000-00000000abcd', { reason: 'No such verdict (test)' });
    expectProblem(unknown, 404, 'not-found', '/path/verdictId');
    const foreign = await withdraw(otherVerdictId, { reason: 'Not ours (test)' });
    expectProblem(foreign, 404, 'not-found', '/path/verdictId');
    expect(await withdrawalCount()).toBe(n);
    // and the other organisation's verdict stands
    const theirs = await request(t.app).get(`/v1/verdicts/${otherVerdictId}`).set(bearer(otherKey));
    expect(theirs.body.withdrawal).toBeNull();
  });

  it('refuses a missing, blank, too long or extra-member body with a 400 naming the field, storing nothing', async () => {
    const v = await newVerdict(121);
    const n = await withdrawalCount();
    expectProblem(await withdraw(v.id, {}), 400, 'validation', '/body/reason');
    expectProblem(await withdraw(v.id, { reason: '   \t ' }), 400, 'validation', '/body/reason');
    expectProblem(await withdraw(v.id, { reason: 'x'.repeat(501) }), 400, 'validation', '/body/reason');
    expectProblem(await withdraw(v.id, { reason: 'ok', withdrawn: true }), 400, 'validation');
    expect(await withdrawalCount()).toBe(n);
    // 500 characters is the limit, and it is accepted
    expect((await withdraw(v.id, { reason: 'y'.repeat(500) })).status).toBe(201);
  });

  it('replays a retry with the same Idempotency-Key byte for byte, and refuses the key with another body (422)', async () => {
    const v = await newVerdict(131);
    const h = { 'Idempotency-Key': 'wd-131' };
    const first = await withdraw(v.id, { reason: 'Scale not calibrated that shift (test)' }, h);
    expect(first.status).toBe(201);
    const n = await withdrawalCount();
    const replay = await withdraw(v.id, { reason: 'Scale not calibrated that shift (test)' }, h);
    expect(replay.status).toBe(201);
    expect(replay.text).toBe(first.text);
    expect(replay.headers['idempotent-replayed']).toBe('true');
    const reused = await withdraw(v.id, { reason: 'Something else (test)' }, h);
    expectProblem(reused, 422, 'idempotency-key-reused');
    // the same key and body for another verdict is another request
    const w = await newVerdict(132);
    expectProblem(await withdraw(w.id, { reason: 'Scale not calibrated that shift (test)' }, h), 422, 'idempotency-key-reused');
    expect(await withdrawalCount()).toBe(n);
  });

  it('is for the quality role and admins (and keys with lots:submit): an auditor or a read-only key gets a 403', async () => {
    const v = await newVerdict(141);
    const auditor = await createTestUser(orgId, 'auditor');
    const cookie = await sessionCookieFor(auditor);
    const asAuditor = await request(t.app).post(`/v1/verdicts/${v.id}/withdrawal`).set('Cookie', cookie).set('X-Lotproof-Console', '1').send({ reason: 'Auditors do not withdraw (test)' });
    expect(asAuditor.status).toBe(403);
    const asReader = await request(t.app).post(`/v1/verdicts/${v.id}/withdrawal`).set(bearer(readerKey)).send({ reason: 'Read-only key (test)' });
    expect(asReader.status).toBe(403);
    const quality = await createTestUser(orgId, 'quality');
    const asQuality = await request(t.app).post(`/v1/verdicts/${v.id}/withdrawal`).set('Cookie', await sessionCookieFor(quality)).set('X-Lotproof-Console', '1').send({ reason: 'Withdrawn by the quality manager (test)' });
    expect(asQuality.status, JSON.stringify(asQuality.body)).toBe(201);
    expect(asQuality.body.withdrawnBy).toEqual({ kind: 'user', userId: quality.id, email: quality.email });
  });

  it('writes a verdict.withdrawn audit event (who, which verdict, why) and a verdict.withdrawn webhook delivery', async () => {
    const hook = await request(t.app).post('/v1/webhooks').set(auth()).send({ url: 'https://hooks.withdrawal.example/in', events: ['verdict.withdrawn'], description: 'test' });
    expect(hook.status, JSON.stringify(hook.body)).toBe(201);
    const v = await newVerdict(151);
    const res = await withdraw(v.id, { reason: 'Sample taken from the wrong pallet (test)' });
    expect(res.status).toBe(201);
    const events = await request(t.app).get('/v1/audit-events?action=verdict.withdrawn').set(auth());
    expect(events.status).toBe(200);
    const e = events.body.items.find((x: { target: { id: string } | null }) => x.target?.id === v.id);
    expect(e).toMatchObject({ action: 'verdict.withdrawn', actor: { kind: 'api-key' }, target: { kind: 'verdict', id: v.id },
      details: { withdrawalId: res.body.id, reason: 'Sample taken from the wrong pallet (test)', seal: res.body.seal.value } });
    const deliveries = await sql<{ event_type: string; payload: string }>(
      'SELECT event_type, payload FROM webhook_deliveries WHERE endpoint_id = $1 AND verdict_id = $2', [hook.body.id, v.id]);
    expect(deliveries.map((d) => d.event_type)).toEqual(['verdict.withdrawn']);
    expect(JSON.parse(deliveries[0]!.payload)).toMatchObject({ type: 'verdict.withdrawn', data: { verdictId: v.id, withdrawalId: res.body.id, seal: res.body.seal.value } });
  });
});

describe('a withdrawn verdict everywhere', () => {
  let v: { id: string; seal: { value: string; sequence: number } };
  let w: { id: string; seal: { value: string; sequence: number } };
  beforeAll(async () => {
    v = await newVerdict(201);
    w = (await withdraw(v.id, { reason: 'Entered against the wrong product (test)' })).body;
  });

  it('the list marks it and filters by status', async () => {
    const all = await request(t.app).get('/v1/verdicts?limit=200').set(auth());
    const listed = all.body.items.find((x: { id: string }) => x.id === v.id);
    expect(listed.withdrawal).toMatchObject({ id: w.id });
    const withdrawn = await request(t.app).get('/v1/verdicts?status=withdrawn&limit=200').set(auth());
    expect(withdrawn.status).toBe(200);
    expect(withdrawn.body.items.length).toBeGreaterThan(0);
    expect(withdrawn.body.items.every((x: { withdrawal: unknown }) => x.withdrawal !== null)).toBe(true);
    expect(withdrawn.body.items.map((x: { id: string }) => x.id)).toContain(v.id);
    const standing = await request(t.app).get('/v1/verdicts?status=not-withdrawn&limit=200').set(auth());
    expect(standing.body.items.every((x: { withdrawal: unknown }) => x.withdrawal === null)).toBe(true);
    expectProblem(await request(t.app).get('/v1/verdicts?status=revoked').set(auth()), 400, 'validation', '/query/status');
  });

  it('the CSV export says it is withdrawn', async () => {
    const res = await request(t.app).get('/v1/exports/verdicts?format=csv').set(auth());
    expect(res.status).toBe(200);
    const lines = res.text.trim().split('\r\n');
    const cols = lines[0]!.split(',');
    expect(cols.slice(-3)).toEqual(['withdrawal_id', 'withdrawn_at', 'withdrawal_reason']);
    const line = lines.find((l) => l.includes(v.id))!;
    expect(line).toContain(w.id);
    expect(line).toContain('Entered against the wrong product (test)');
  });

  it('the NDJSON export holds the withdrawal in ledger order, and the offline verifier verifies it', async () => {
    const res = await request(t.app).get('/v1/exports/verdicts?format=ndjson').set(auth()).buffer(true).parse((r, cb) => {
      let s = '';
      r.on('data', (c: Buffer) => (s += c.toString('utf8')));
      r.on('end', () => cb(null, s));
    });
    expect(res.status).toBe(200);
    const text = res.body as string;
    const lines = text.split('\n').filter((l) => l !== '');
    const docs = lines.slice(1).map((l) => JSON.parse(l));
    expect(docs.map((d) => d.record.sequence)).toEqual(docs.map((_, i) => i + 1));
    const wd = docs.find((d) => d.record.sequence === w.seal.sequence);
    expect(wd.format).toBe('lotproof.sealed-withdrawal/1');
    expect(Object.keys(wd)).toEqual(['format', 'inclusion', 'kid', 'record', 'seal', 'signature']);
    expect(wd.record.verdict).toMatchObject({ id: v.id, seal: v.seal.value });

    const dir = mkdtempSync(join(tmpdir(), 'lotproof-withdrawal-'));
    try {
      const jwks = await request(t.app).get('/.well-known/jwks.json');
      writeFileSync(join(dir, 'jwks.json'), JSON.stringify(jwks.body));
      writeFileSync(join(dir, 'export.ndjson'), text);
      const verifier = join(process.cwd(), 'clients', 'verifier', 'verify.mjs');
      const ok = execFileSync(process.execPath, [verifier, '--jwks', join(dir, 'jwks.json'), '--quiet', join(dir, 'export.ndjson')], { encoding: 'utf8' });
      expect(ok).toMatch(/withdrawals\s+\d+ sealed withdrawal/);
      expect(ok).toMatch(/complete from position 1/);

      // A withdrawal that names another seal for its verdict is caught (here only the named seal is
      // changed, so its own seal no longer matches either).
      const tampered = lines.map((l, i) => (i === 0 ? l : l.replace(`"seal":"${v.seal.value}","sequence"`, `"seal":"${'0'.repeat(64)}","sequence"`)));
      expect(tampered.join('\n')).not.toBe(lines.join('\n'));
      writeFileSync(join(dir, 'bad.ndjson'), tampered.join('\n') + '\n');
      const bad = spawnSync(process.execPath, [verifier, '--jwks', join(dir, 'jwks.json'), '--quiet', join(dir, 'bad.ndjson')], { encoding: 'utf8' });
      expect(bad.status).toBe(1);
      expect(bad.stdout).toMatch(/the withdrawal names seal 0{64}/);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });

  it('a filtered NDJSON export holds the selected verdict and its withdrawal', async () => {
    const res = await request(t.app).get('/v1/exports/verdicts?format=ndjson&status=withdrawn').set(auth()).buffer(true).parse((r, cb) => {
      let s = '';
      r.on('data', (c: Buffer) => (s += c.toString('utf8')));
      r.on('end', () => cb(null, s));
    });
    const lines = (res.body as string).split('\n').filter((l) => l !== '');
    const header = JSON.parse(lines[0]!);
    expect(header).toMatchObject({ complete: false, filter: { status: 'withdrawn' } });
    const docs = lines.slice(1).map((l) => JSON.parse(l));
    const seqs = docs.map((d) => d.record.sequence);
    expect(seqs).toEqual([...seqs].sort((a, b) => a - b));
    expect(seqs).toContain(v.seal.sequence);
    expect(seqs).toContain(w.seal.sequence);
    // every verdict in it is withdrawn, and every withdrawal names one of them
    const verdictIds = new Set(docs.filter((d) => d.format === 'lotproof.sealed-verdict/1').map((d) => d.record.verdictId));
    for (const d of docs.filter((x) => x.format === 'lotproof.sealed-withdrawal/1')) expect(verdictIds.has(d.record.verdict.id)).toBe(true);
  });
});
