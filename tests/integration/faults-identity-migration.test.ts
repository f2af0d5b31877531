// Issue 14, item 5, for keys made by keys before migration 0103: they name their parent in
// created_by only. The migration links them, revokes those whose parent (or an ancestor) has ended,
// and caps the expiry of those that would outlive their parent — each change in the audit trail.
// Run on a database of its own in the test cluster, migrated to 0102 and filled as an older server would.
import { randomUUID } from 'node:crypto';
import { Sequelize, QueryTypes } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { migrator } from '../../server/db/migrate';
import { testSuperuserUrl } from '../support/app';

const name = `lotproof_mig_${randomUUID().slice(0, 8)}`;
let admin: Sequelize;
let db: Sequelize;

beforeAll(async () => {
  // Creating a database takes the cluster's administrator; the app's role may not.
  admin = new Sequelize(testSuperuserUrl(), { dialect: 'postgres', logging: false });
  await admin.query(`CREATE DATABASE ${name}`);
  const url = new URL(testSuperuserUrl());
  url.pathname = `/${name}`;
  db = new Sequelize(url.toString(), { dialect: 'postgres', logging: false, define: { underscored: true, timestamps: false } });
  await migrator(db).up({ to: '0102-session-idle-timeout' });
});
afterAll(async () => {
  await db?.close();
  await admin?.query(`DROP DATABASE IF EXISTS ${name}`);
  await admin?.close();
});

describe('migration 0103 on keys made by keys before it', () => {
  it('links, revokes and caps them, each change in the audit trail', async () => {
    const q = <T extends object>(sql: string, bind: unknown[] = []) => db.query<T>(sql, { bind, type: QueryTypes.SELECT });
    const [org] = await q<{ id: string }>(`INSERT INTO organisations (name, slug) VALUES ('Legacy packer', $1) RETURNING id`, [`legacy-${randomUUID().slice(0, 8)}`]);
    const userId = randomUUID();
    let n = 0;
    const key = async (extra: { createdBy?: string | null; expiresAt?: string | null; revokedAt?: string | null }) => {
      n += 1;
      const [row] = await q<{ id: string }>(
        `INSERT INTO api_keys (organisation_id, name, prefix, secret_hash, scopes, expires_at, revoked_at, created_by)
         VALUES ($1, $2, $3, '\\x00', '{verdicts:read}', $4, $5, $6) RETURNING id`,
        [org!.id, `key ${n}`, `legacy${String(n).padStart(6, '0')}`, extra.expiresAt ?? null, extra.revokedAt ?? null, extra.createdBy ?? null],
      );
      return row!.id;
    };
    const soon = new Date(Date.now() + 3600_000).toISOString();
    const past = new Date(Date.now() - 3600_000).toISOString();
    // an admin's key (created_by a user), never expiring, with a child and a grandchild that outlive nothing
    const root = await key({ createdBy: userId });
    const child = await key({ createdBy: root });
    // a revoked parent whose child and grandchild still work
    const revokedParent = await key({ createdBy: userId, revokedAt: past });
    const orphan = await key({ createdBy: revokedParent });
    const grandOrphan = await key({ createdBy: orphan });
    // an expired parent whose child works
    const expiredParent = await key({ createdBy: userId, expiresAt: past });
    const strandedChild = await key({ createdBy: expiredParent });
    // a parent that expires soon, whose never-expiring child would outlive it
    const mortal = await key({ createdBy: userId, expiresAt: soon });
    const immortal = await key({ createdBy: mortal });

    await migrator(db).up({ to: '0103-api-key-parents' });

    const rows = await q<{ id: string; parent_key_id: string | null; revoked_at: Date | null; expires_at: Date | null }>(
      'SELECT id, parent_key_id, revoked_at, expires_at FROM api_keys WHERE organisation_id = $1',
      [org!.id],
    );
    const by = new Map(rows.map((r) => [r.id, r]));
    expect(by.get(root)!.parent_key_id).toBeNull();
    expect(by.get(child)!.parent_key_id).toBe(root);
    expect(by.get(child)!.revoked_at).toBeNull();
    expect(by.get(child)!.expires_at).toBeNull();
    expect(by.get(grandOrphan)!.parent_key_id).toBe(orphan);
    for (const ended of [orphan, grandOrphan, strandedChild]) expect(by.get(ended)!.revoked_at, ended).not.toBeNull();
    expect(by.get(immortal)!.revoked_at).toBeNull();
    expect(by.get(immortal)!.expires_at!.toISOString()).toBe(soon);

    const audit = await q<{ target_id: string; action: string; actor_kind: string; details: Record<string, unknown> }>(
      'SELECT target_id, action, actor_kind, details FROM audit_events WHERE organisation_id = $1',
      [org!.id],
    );
    const events = new Map(audit.map((e) => [e.target_id, e]));
    expect(audit).toHaveLength(4);
    expect(events.get(orphan)).toMatchObject({ action: 'key.revoked', actor_kind: 'operator', details: { reason: 'parent-revoked', parentKeyId: revokedParent } });
    expect(events.get(grandOrphan)?.details).toMatchObject({ reason: 'parent-revoked', parentKeyId: orphan });
    expect(events.get(strandedChild)?.details).toMatchObject({ reason: 'parent-expired', parentKeyId: expiredParent });
    expect(events.get(immortal)?.details).toMatchObject({ reason: 'parent-expiry', parentKeyId: mortal, effectiveAt: soon });
  });
});
