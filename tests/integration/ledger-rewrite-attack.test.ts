// Issue 15's acceptance: a database administrator rewrites history, and an auditor who kept one
// earlier checkpoint and the JWKS pinned before the attack detects it with the offline verifier.
//
// The attacker works as PostgreSQL's superuser only — no signing key of the server: inserts a key
// of their own into signing_keys, switches the append-only triggers off, turns a nonconforming
// verdict into a conforming one, re-seals and re-signs it and every later verdict (re-linking the
// chain), throws the tree and the checkpoints away, and lets the server issue a fresh checkpoint
// (signed with the server's genuine key, over the rewritten tree). Everything then "verifies" from
// the inside. The auditor's kept checkpoint and pinned keys catch it:
// - with the JWKS pinned before the attack: the rewritten records are signed by a key not pinned;
// - even with the JWKS fetched after the attack: the new tree is not consistent with the kept
//   checkpoint (RFC 9162 §2.1.4), whether checked from the export's own leaves or from the
//   server's consistency proof.
import { spawnSync } from 'node:child_process';
import { createHash, generateKeyPairSync, sign } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import canonicalize from 'canonicalize';
import request from 'supertest';
import { QueryTypes } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openDatabase, type Database } from '../../server/db/database';
import { buildTestApp, createTestKey, createTestOrganisation, testDatabaseUrl, type TestApp } from '../support/app';
import { createProduct, lotBody, measurements } from '../support/lots';
import { proveSealInLedger, type LedgerSource } from '../../console/src/lib/checkpoints';

/** The browser's localStorage, for the console's own check run here (the console keeps checkpoints in it). */
class MemoryStorage implements Storage {
  private items = new Map<string, string>();
  get length() {
    return this.items.size;
  }
  clear() {
    this.items.clear();
  }
  getItem(k: string) {
    return this.items.get(k) ?? null;
  }
  key(i: number) {
    return [...this.items.keys()][i] ?? null;
  }
  removeItem(k: string) {
    this.items.delete(k);
  }
  setItem(k: string, v: string) {
    this.items.set(k, String(v));
  }
}

let t: TestApp;
let superuser: Database;
const work = mkdtempSync(join(tmpdir(), 'lotproof-rewrite-attack-'));
const file = (name: string, content: unknown) => {
  const p = join(work, name);
  writeFileSync(p, typeof content === 'string' ? content : JSON.stringify(content));
  return p;
};
const verifier = (...args: string[]) => {
  const r = spawnSync(process.execPath, ['clients/verifier/verify.mjs', ...args], { encoding: 'utf8' });
  return { code: r.status, out: `${r.stdout}\n${r.stderr}` };
};

beforeAll(() => {
  t = buildTestApp();
  superuser = openDatabase(process.env.LOTPROOF_TEST_SUPERUSER_URL ?? testDatabaseUrl(), undefined, 2);
});
afterAll(async () => {
  await superuser.close();
  await t.close();
  rmSync(work, { recursive: true, force: true });
});

describe('a history rewritten by the database administrator', () => {
  it('is detected by an auditor who kept one checkpoint and pinned the keys', async () => {
    const org = await createTestOrganisation('Rewrite attack packer (test)');
    const key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
    const auth = { Authorization: `Bearer ${key}` };
    const product = await createProduct(t.app, key);

    // Five lots; the third is well short of its nominal quantity (nonconforming).
    const ids: string[] = [];
    for (let i = 0; i < 5; i++) {
      const body = lotBody(product.sku, 7100 + i, i === 2 ? { measurements: measurements(7100 + i, 50, 470, 4) } : {});
      const res = await request(t.app).post('/v1/lots').set(auth).send(body);
      expect(res.status, res.text).toBe(201);
      ids.push(res.body.id);
    }
    const victim = (await request(t.app).get(`/v1/verdicts/${ids[2]}`).set(auth)).body;
    expect(victim.decision).toBe('nonconforming');

    // The auditor: pins the JWKS, takes a checkpoint and keeps it; a whole export verifies.
    const pinned = file('jwks-pinned.json', (await request(t.app).get('/.well-known/jwks.json')).body);
    const issued = await request(t.app).post('/v1/ledger/checkpoints').set(auth);
    expect([200, 201], issued.text).toContain(issued.status);
    const kept = issued.body;
    expect(kept.treeSize).toBe(5);
    const folder = join(work, 'checkpoints');
    const keep = verifier('checkpoint', '--jwks', pinned, '--checkpoints', folder, file('checkpoint-before.json', kept));
    expect(keep.code, keep.out).toBe(0);
    const before = await request(t.app).get('/v1/exports/verdicts?format=ndjson').set(auth).buffer(true).parse((res, cb) => {
      let text = '';
      res.on('data', (c: Buffer) => (text += c));
      res.on('end', () => cb(null, text));
    });
    const honest = verifier('--jwks', pinned, '--checkpoints', folder, file('export-before.ndjson', before.body));
    expect(honest.code, honest.out).toBe(0);

    // The console's seal lookup in the auditor's browser: the same checks, its checkpoints kept in localStorage.
    const browser = new MemoryStorage();
    const source: LedgerSource = {
      inclusion: async (seal) => {
        const r = await request(t.app).get('/v1/ledger/proofs/inclusion').query({ seal }).set(auth);
        if (r.status !== 200) throw new Error(`inclusion proof of ${seal}: ${r.status} ${r.text}`);
        return r.status === 200 ? r.body : null;
      },
      consistency: async (fromSize, toSize) => {
        const r = await request(t.app).get('/v1/ledger/proofs/consistency').query({ fromSize, toSize }).set(auth);
        return r.status === 200 ? r.body.proof : 'missing';
      },
      jwks: async () => (await request(t.app).get('/.well-known/jwks.json')).body,
    };
    const lookedUp = await proveSealInLedger(victim.seal.value, source, browser);
    expect([lookedUp?.signature.state, lookedUp?.inclusion.state, lookedUp?.consistency, lookedUp?.keptNow]).toEqual(['pass', 'pass', 'none', true]);

    // The attack, as the superuser.
    const own = generateKeyPairSync('ed25519');
    const x = (own.publicKey.export({ format: 'jwk' }) as { x: string }).x;
    const kid = createHash('sha256').update(`{"crv":"Ed25519","kty":"OKP","x":"${x}"}`).digest('base64url');
    await superuser.sequelize.transaction(async (transaction) => {
      const q = (sql: string, bind: unknown[] = []) => superuser.sequelize.query(sql, { bind, transaction });
      await q("SET LOCAL session_replication_role = 'replica'"); // no triggers fire: append-only is off
      await q("INSERT INTO signing_keys (kid, public_jwk, created_at, nbf) VALUES ($1, $2, now() - interval '1 day', now() - interval '1 day')", [
        kid,
        JSON.stringify({ kty: 'OKP', crv: 'Ed25519', x, kid, alg: 'EdDSA', use: 'sig' }),
      ]);
      const rows = await superuser.sequelize.query<{ id: string; sequence: string; seal: string; record: string }>(
        'SELECT id, sequence, seal, record FROM verdicts WHERE organisation_id = $1 ORDER BY sequence',
        { bind: [org.id], type: QueryTypes.SELECT, transaction },
      );
      let previous: string | null = null;
      for (const r of rows) {
        const record = JSON.parse(r.record) as { previousSeal: string | null; result: { decision: string } };
        const rewrite = Number(r.sequence) >= 3;
        if (rewrite) {
          record.previousSeal = previous;
          if (Number(r.sequence) === 3) record.result.decision = 'conforming';
          const text = canonicalize(record)!;
          const seal = createHash('sha256').update(text, 'utf8').digest('hex');
          const signature = sign(null, Buffer.from(seal, 'hex'), own.privateKey).toString('base64url');
          await q('UPDATE verdicts SET record = $2, seal = $3, previous_seal = $4, signature = $5, kid = $6, decision = $7 WHERE id = $1', [
            r.id, text, seal, previous, signature, kid, record.result.decision,
          ]);
          previous = seal;
        } else {
          previous = r.seal;
        }
      }
      await q('DELETE FROM ledger_tree_nodes WHERE organisation_id = $1', [org.id]);
      await q('DELETE FROM ledger_checkpoints WHERE organisation_id = $1', [org.id]);
    });
    expect((await request(t.app).get(`/v1/verdicts/${ids[2]}`).set(auth)).body.decision).toBe('conforming');

    // From the inside, everything checks: the server issues a fresh checkpoint over the new tree.
    const fresh = await request(t.app).post('/v1/ledger/checkpoints').set(auth);
    expect(fresh.status, fresh.text).toBe(201);
    expect(fresh.body.treeSize).toBe(5);
    expect(fresh.body.rootHash).not.toBe(kept.rootHash);
    const after = await request(t.app).get('/v1/exports/verdicts?format=ndjson').set(auth).buffer(true).parse((res, cb) => {
      let text = '';
      res.on('data', (c: Buffer) => (text += c));
      res.on('end', () => cb(null, text));
    });
    const exportAfter = file('export-after.ndjson', after.body);
    const jwksAfter = file('jwks-after.json', (await request(t.app).get('/.well-known/jwks.json')).body);
    // Without the kept checkpoint and with the keys as published now, the rewritten export passes:
    // this is what the checkpoint and the pinned keys are for.
    const naive = verifier('--jwks', jwksAfter, exportAfter);
    expect(naive.code, naive.out).toBe(0);

    // The auditor's pinned keys catch it: the rewritten records are signed by a key they never pinned.
    const withPinned = verifier('--jwks', pinned, exportAfter);
    expect(withPinned.code, withPinned.out).toBe(1);
    expect(withPinned.out).toMatch(new RegExp(kid.slice(0, 12)));

    // Even with the keys as published now, the kept checkpoint catches it: the new tree does not
    // extend the one the auditor saw.
    const withKept = verifier('--jwks', jwksAfter, '--checkpoints', folder, exportAfter);
    expect(withKept.code, withKept.out).toBe(1);
    expect(withKept.out).toMatch(/consisten|rewritten|fork|differ/i);

    // And a checkpoint received on its own (by e-mail, by webhook), with the server's consistency proof.
    const proof = await request(t.app).get('/v1/ledger/proofs/consistency').query({ fromSize: 5 }).set(auth);
    expect(proof.status, proof.text).toBe(200);
    // The console's lookup with the checkpoint it had kept: not consistent, and the new one is not kept.
    const rewritten = (await request(t.app).get(`/v1/verdicts/${ids[2]}`).set(auth)).body;
    const lookedUpAfter = await proveSealInLedger(rewritten.seal.value, source, browser);
    expect(lookedUpAfter?.inclusion.state).toBe('pass');
    expect(lookedUpAfter?.consistency).toBe('fail');
    expect(lookedUpAfter?.keptNow).toBe(false);

    const alone = verifier('checkpoint', '--jwks', jwksAfter, '--checkpoints', folder, '--consistency', file('proof.json', proof.body), file('checkpoint-after.json', fresh.body));
    expect(alone.code, alone.out).toBe(1);
  });
});
