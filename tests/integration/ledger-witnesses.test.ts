// Witnesses of the ledger (issue 15): the people an organisation names receive every new checkpoint
// by e-mail and/or webhook. Adding and removing them is audited in the change's own transaction and
// scoped to the organisation; each checkpoint writes one e-mail per e-mail witness carrying the
// checkpoint exactly, and one `ledger.checkpoint` delivery per subscribed endpoint, in the
// checkpoint's own transaction (a rolled-back checkpoint leaves no outbox rows).
import { createPublicKey, verify } from 'node:crypto';
import canonicalize from 'canonicalize';
import pg from 'pg';
import pino from 'pino';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { issueCheckpoint, onCheckpointIssued } from '../../server/ledger/checkpoints';
import { CHECKPOINT_BEGIN, CHECKPOINT_END } from '../../server/ledger/witnesses-outbox';
import { startCheckpointSchedule } from '../../server/jobs/checkpoint-schedule';
import { deliverAlertEmail } from '../../server/jobs/alert-email';
import { secretBox } from '../../server/core/secret-box';
import type { RunningSmtpFake } from '../../server/platform/smtp-fake';
import { buildTestApp, createTestKey, createTestOrganisation, testConfig, testDatabaseUrl, type TestApp } from '../support/app';
import { createTestUser, sessionCookieFor, startTestSmtp } from '../support/identity';
import { createProduct, lotBody } from '../support/lots';

let t: TestApp;
let smtp: RunningSmtpFake;
let pool: pg.Pool;

beforeAll(async () => {
  smtp = await startTestSmtp();
  t = buildTestApp({ smtp: { ...testConfig().smtp, host: smtp.host, port: smtp.port } });
  pool = new pg.Pool({ connectionString: testDatabaseUrl(), max: 2 });
});
afterAll(async () => {
  await pool.end();
  await t.close();
  await smtp.stop();
});

interface Org {
  id: string;
  /** keys:manage, audit:read, lots, products: the organisation's admin system. */
  auth: { Authorization: string };
  sku: string;
}
async function newOrg(name: string): Promise<Org> {
  const org = await createTestOrganisation(name);
  const key = await createTestKey(org.id, ['keys:manage', 'audit:read', 'verdicts:read', 'lots:submit', 'products:write']);
  const product = await createProduct(t.app, key);
  return { id: org.id, auth: { Authorization: `Bearer ${key}` }, sku: product.sku };
}
let seed = 1;
async function submit(o: Org, n: number): Promise<void> {
  for (let i = 0; i < n; i++) {
    const res = await request(t.app).post('/v1/lots').set(o.auth).send(lotBody(o.sku, 7000 + seed++));
    expect(res.status, JSON.stringify(res.body)).toBe(201);
  }
}
async function auditActions(o: Org, action: string): Promise<Array<{ target: { id: string }; details: Record<string, unknown> }>> {
  const res = await request(t.app).get('/v1/audit-events').query({ action }).set(o.auth);
  expect(res.status, res.text).toBe(200);
  return res.body.items;
}
async function emailRows(o: Org) {
  const { rows } = await pool.query<{ id: string; recipients: string[]; subject: string; body: string; checkpoint_tree_size: string; witness_id: string; verdict_id: string | null }>(
    'SELECT id, recipients, subject, body, checkpoint_tree_size, witness_id, verdict_id FROM alert_emails WHERE organisation_id = $1 AND checkpoint_tree_size IS NOT NULL ORDER BY created_at, recipients[1]',
    [o.id],
  );
  return rows;
}
async function checkpointDeliveries(o: Org) {
  const { rows } = await pool.query<{ endpoint_id: string; event_type: string; payload: string; verdict_id: string | null; checkpoint_tree_size: string }>(
    "SELECT endpoint_id, event_type, payload, verdict_id, checkpoint_tree_size FROM webhook_deliveries WHERE organisation_id = $1 AND event_type = 'ledger.checkpoint' ORDER BY created_at",
    [o.id],
  );
  return rows;
}
/** The checkpoint block of a witness e-mail: the line between the markers. */
function checkpointIn(body: string): string {
  const lines = body.split('\n');
  const at = lines.indexOf(CHECKPOINT_BEGIN);
  expect(at, body).toBeGreaterThanOrEqual(0);
  expect(lines[at + 2]).toBe(CHECKPOINT_END);
  return lines[at + 1]!;
}
/** clients/verifier/FORMAT.md "Checkpoint": Ed25519 over the RFC 8785 canonical JSON (the `canonicalize` package) without the signature. */
async function signatureVerifies(c: Record<string, unknown>): Promise<boolean> {
  const jwks = (await request(t.app).get('/.well-known/jwks.json')).body as { keys: { kid: string; kty: string; crv: string; x: string }[] };
  const jwk = jwks.keys.find((k) => k.kid === c.kid);
  if (!jwk) return false;
  const { signature, ...unsigned } = c;
  return verify(null, Buffer.from(canonicalize(unsigned)!, 'utf8'), createPublicKey({ key: { kty: jwk.kty, crv: jwk.crv, x: jwk.x }, format: 'jwk' }), Buffer.from(String(signature), 'base64url'));
}

describe('witnesses: add, list, remove', () => {
  let a: Org;
  beforeAll(async () => {
    a = await newOrg('Witnessed packer');
  });

  it('adds a witness by e-mail, lists it, removes it, and audits both changes', async () => {
    const added = await request(t.app).post('/v1/ledger/witnesses').set(a.auth).send({ name: ' Dana Okafor ', role: 'external auditor', email: 'dana@audit.example' });
    expect(added.status, added.text).toBe(201);
    expect(added.body).toMatchObject({ name: 'Dana Okafor', role: 'external auditor', email: 'dana@audit.example', webhook: null });

    const listed = await request(t.app).get('/v1/ledger/witnesses').set(a.auth);
    expect(listed.status).toBe(200);
    expect(listed.body.items.map((w: { id: string }) => w.id)).toContain(added.body.id);

    const addedEvents = await auditActions(a, 'witness.added');
    expect(addedEvents.map((e) => e.target.id)).toContain(added.body.id);
    expect(addedEvents.find((e) => e.target.id === added.body.id)!.details).toMatchObject({ name: 'Dana Okafor', email: 'dana@audit.example' });

    expect((await request(t.app).delete(`/v1/ledger/witnesses/${added.body.id}`).set(a.auth)).status).toBe(204);
    expect((await request(t.app).get('/v1/ledger/witnesses').set(a.auth)).body.items.map((w: { id: string }) => w.id)).not.toContain(added.body.id);
    expect((await auditActions(a, 'witness.removed')).map((e) => e.target.id)).toEqual([added.body.id]);
    // A second removal finds nothing and audits nothing.
    expect((await request(t.app).delete(`/v1/ledger/witnesses/${added.body.id}`).set(a.auth)).status).toBe(404);
    expect(await auditActions(a, 'witness.removed')).toHaveLength(1);
  });

  it('names a webhook endpoint only when it receives ledger.checkpoint events', async () => {
    const plain = await request(t.app).post('/v1/webhooks').set(a.auth).send({ url: 'https://hooks.witness.example/verdicts', events: ['verdict.created'] });
    expect(plain.status, plain.text).toBe(201);
    const refused = await request(t.app).post('/v1/ledger/witnesses').set(a.auth).send({ name: 'Customer QA', role: 'customer', webhookId: plain.body.id });
    expect(refused.status, refused.text).toBe(422);
    expect(refused.body.errors.map((e: { pointer: string }) => e.pointer)).toContain('/body/webhookId');

    const hook = await request(t.app).post('/v1/webhooks').set(a.auth).send({ url: 'https://hooks.witness.example/checkpoints', events: ['ledger.checkpoint'] });
    expect(hook.status, hook.text).toBe(201);
    const added = await request(t.app).post('/v1/ledger/witnesses').set(a.auth).send({ name: 'Customer QA', role: 'customer', webhookId: hook.body.id });
    expect(added.status, added.text).toBe(201);
    expect(added.body.webhook).toEqual({ id: hook.body.id, url: 'https://hooks.witness.example/checkpoints', receivesCheckpoints: true });
    expect(added.body.email).toBeNull();
  });

  it('refuses a witness with neither e-mail nor endpoint, naming the field, and a blank name', async () => {
    const none = await request(t.app).post('/v1/ledger/witnesses').set(a.auth).send({ name: 'Nobody', role: 'inspector' });
    expect(none.status).toBe(400);
    expect(none.body.errors.map((e: { pointer: string }) => e.pointer)).toContain('/body/email');
    const blank = await request(t.app).post('/v1/ledger/witnesses').set(a.auth).send({ name: '   ', role: 'inspector', email: 'x@inspect.example' });
    expect(blank.status).toBe(400);
    expect(blank.body.errors.map((e: { pointer: string }) => e.pointer)).toContain('/body/name');
  });

  it('lets auditors list witnesses but only admins add or remove them', async () => {
    const auditorKey = await createTestKey(a.id, ['audit:read']);
    const auditor = { Authorization: `Bearer ${auditorKey}` };
    expect((await request(t.app).get('/v1/ledger/witnesses').set(auditor)).status).toBe(200);
    expect((await request(t.app).post('/v1/ledger/witnesses').set(auditor).send({ name: 'X', role: 'y', email: 'x@y.example' })).status).toBe(403);

    const auditorUser = await createTestUser(a.id, 'auditor');
    const cookie = await sessionCookieFor(auditorUser);
    expect((await request(t.app).get('/v1/ledger/witnesses').set('Cookie', cookie)).status).toBe(200);
    const byAuditor = await request(t.app).post('/v1/ledger/witnesses').set('Cookie', cookie).set('X-Lotproof-Console', '1').send({ name: 'X', role: 'y', email: 'x@y.example' });
    expect(byAuditor.status).toBe(403);
    const admin = await createTestUser(a.id, 'admin');
    const byAdmin = await request(t.app).post('/v1/ledger/witnesses').set('Cookie', await sessionCookieFor(admin)).set('X-Lotproof-Console', '1').send({ name: 'Inspector Lee', role: 'inspector', email: 'lee@inspect.example' });
    expect(byAdmin.status, byAdmin.text).toBe(201);
    const removed = await request(t.app).delete(`/v1/ledger/witnesses/${byAdmin.body.id}`).set('Cookie', cookie).set('X-Lotproof-Console', '1');
    expect(removed.status).toBe(403);
  });

  it('keeps each organisation to its own witnesses and endpoints', async () => {
    const b = await newOrg('Other packer');
    const mine = await request(t.app).post('/v1/ledger/witnesses').set(a.auth).send({ name: 'Private auditor', role: 'auditor', email: 'private@audit.example' });
    expect(mine.status).toBe(201);
    const theirs = await request(t.app).get('/v1/ledger/witnesses').set(b.auth);
    expect(theirs.status).toBe(200);
    expect(theirs.body.items).toEqual([]);
    expect((await request(t.app).delete(`/v1/ledger/witnesses/${mine.body.id}`).set(b.auth)).status).toBe(404);
    expect((await request(t.app).get('/v1/ledger/witnesses').set(a.auth)).body.items.map((w: { id: string }) => w.id)).toContain(mine.body.id);
    expect(await auditActions(b, 'witness.removed')).toEqual([]);

    const aHook = await request(t.app).post('/v1/webhooks').set(a.auth).send({ url: 'https://hooks.witness.example/a', events: ['ledger.checkpoint'] });
    const borrowed = await request(t.app).post('/v1/ledger/witnesses').set(b.auth).send({ name: 'Borrower', role: 'customer', webhookId: aHook.body.id });
    expect(borrowed.status).toBe(422);
    expect(borrowed.body.errors.map((e: { pointer: string }) => e.pointer)).toContain('/body/webhookId');
  });
});

describe('every new checkpoint reaches the witnesses', () => {
  let o: Org;
  let hookId: string;
  let otherHookId: string;
  let removedId: string;

  beforeAll(async () => {
    o = await newOrg('Checkpointed packer');
    for (const [name, email] of [['Ann Auditor', 'ann@audit.example'], ['Carl Customer', 'carl@customer.example']]) {
      expect((await request(t.app).post('/v1/ledger/witnesses').set(o.auth).send({ name, role: 'witness', email })).status).toBe(201);
    }
    const gone = await request(t.app).post('/v1/ledger/witnesses').set(o.auth).send({ name: 'Gone', role: 'former auditor', email: 'gone@audit.example' });
    removedId = gone.body.id;
    expect((await request(t.app).delete(`/v1/ledger/witnesses/${removedId}`).set(o.auth)).status).toBe(204);
    hookId = (await request(t.app).post('/v1/webhooks').set(o.auth).send({ url: 'https://hooks.checkpointed.example/cp', events: ['ledger.checkpoint'] })).body.id;
    otherHookId = (await request(t.app).post('/v1/webhooks').set(o.auth).send({ url: 'https://hooks.checkpointed.example/v', events: ['verdict.created'] })).body.id;
    await submit(o, 3);
  });

  it('writes an e-mail per witness carrying the checkpoint exactly, and a delivery to the subscribed endpoint', async () => {
    const issued = await request(t.app).post('/v1/ledger/checkpoints').set(o.auth);
    expect(issued.status, issued.text).toBe(201);
    const checkpoint = issued.body as Record<string, unknown>;
    expect(checkpoint.treeSize).toBe(3);

    const mails = await emailRows(o);
    expect(mails.map((m) => m.recipients)).toEqual([['ann@audit.example'], ['carl@customer.example']]);
    for (const m of mails) {
      expect(m.verdict_id).toBeNull();
      expect(Number(m.checkpoint_tree_size)).toBe(3);
      expect(m.witness_id).not.toBe(removedId);
      const text = checkpointIn(m.body);
      expect(JSON.parse(text)).toEqual(checkpoint);
      // The block is the checkpoint's RFC 8785 form (the `canonicalize` package, written independently).
      expect(text).toBe(canonicalize(checkpoint));
      expect(await signatureVerifies(JSON.parse(text))).toBe(true);
      expect(m.body).toMatch(/offline verifier's checkpoint mode/);
    }

    const deliveries = await checkpointDeliveries(o);
    expect(deliveries.map((d) => d.endpoint_id)).toEqual([hookId]);
    expect(deliveries.map((d) => d.endpoint_id)).not.toContain(otherHookId);
    const payload = JSON.parse(deliveries[0]!.payload);
    expect(payload).toEqual({ type: 'ledger.checkpoint', timestamp: checkpoint.issuedAt, data: checkpoint });
    expect(deliveries[0]!.verdict_id).toBeNull();
    expect(Number(deliveries[0]!.checkpoint_tree_size)).toBe(3);
  });

  it('sends the e-mail through the alert-email job with the checkpoint block intact', async () => {
    const [m] = await emailRows(o);
    const deps = { db: pool, config: t.ctx.config, logger: pino({ level: 'silent' }), secrets: secretBox(t.ctx.config) };
    await deliverAlertEmail(deps, m!.id);
    const got = smtp.messages().find((x) => x.to.includes('ann@audit.example') && x.subject.includes('checkpoint'));
    expect(got, JSON.stringify(smtp.messages().map((x) => x.subject))).toBeDefined();
    expect(checkpointIn(got!.text.replace(/\r\n/g, '\n'))).toBe(checkpointIn(m!.body));
  });

  it('does the same for scheduled checkpoints, and never twice for one checkpoint', async () => {
    await submit(o, 2);
    const schedule = startCheckpointSchedule({ sequelize: t.ctx.db.sequelize, config: t.ctx.config, logger: pino({ level: 'silent' }) });
    try {
      await schedule.runOnce();
    } finally {
      await schedule.stop();
    }
    const latest = (await request(t.app).get('/v1/ledger/checkpoints/latest').set(o.auth)).body;
    expect(latest.treeSize).toBe(5);
    const mails = (await emailRows(o)).filter((m) => Number(m.checkpoint_tree_size) === 5);
    expect(mails).toHaveLength(2);
    for (const m of mails) expect(JSON.parse(checkpointIn(m.body))).toEqual(latest);
    // Nothing new appended: the on-demand call returns the same checkpoint and writes nothing.
    expect((await request(t.app).post('/v1/ledger/checkpoints').set(o.auth)).status).toBe(200);
    expect((await emailRows(o)).filter((m) => Number(m.checkpoint_tree_size) === 5)).toHaveLength(2);
    expect((await checkpointDeliveries(o)).map((d) => Number(d.checkpoint_tree_size))).toEqual([3, 5]);
  });

  it('leaves no outbox rows when the checkpoint itself is rolled back', async () => {
    await submit(o, 1);
    const emailsBefore = (await emailRows(o)).length;
    const deliveriesBefore = (await checkpointDeliveries(o)).length;
    // A hook registered after the witnesses' runs after it in the same transaction, and fails it.
    const off = onCheckpointIssued(async () => {
      throw new Error('refused after the witnesses were written (test)');
    });
    try {
      await expect(issueCheckpoint(t.ctx.db.sequelize, t.ctx.config, o.id)).rejects.toThrow(/refused after the witnesses/);
    } finally {
      off();
    }
    expect((await request(t.app).get('/v1/ledger/checkpoints/latest').set(o.auth)).body.treeSize).toBe(5);
    expect(await emailRows(o)).toHaveLength(emailsBefore);
    expect(await checkpointDeliveries(o)).toHaveLength(deliveriesBefore);
    // Issued again without the failing hook, the checkpoint and its outbox rows are there.
    expect((await request(t.app).post('/v1/ledger/checkpoints').set(o.auth)).status).toBe(201);
    expect((await emailRows(o)).filter((m) => Number(m.checkpoint_tree_size) === 6)).toHaveLength(2);
    expect((await checkpointDeliveries(o)).filter((d) => Number(d.checkpoint_tree_size) === 6)).toHaveLength(1);
  });
});
