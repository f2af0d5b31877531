// API keys: issued with scopes, shown once, stored as a SHA-256 hash with a short visible prefix.
// A key is high-entropy random, so a fast hash is the right tool here (a slow password hash is for
// low-entropy secrets such as passwords).
//
// Persistence: the ApiKey model issues, lists and revokes; the check of a presented key, on every
// request, reads the row with a raw prepared statement (db/raw.ts) instead, as no model instance
// is needed there and the read is the hottest of the server; and revoking a key's descendants is
// one set-based raw statement (a recursive walk down parent_key_id), not a model call per key.
//
// A key made by a key records its parent. Revoking the parent revokes every descendant in the same
// transaction, so the check of a presented key stays one row and needs no walk up its ancestry;
// expiry needs none either, as a child never expires later than its parent (api-keys.ts). A child
// being made while its parent is revoked cannot slip between the two: the maker holds the parent's
// row FOR SHARE until its child is committed, and the revoker takes the row FOR UPDATE before it
// walks down, so it waits for the child and then sees it.
import { createHash, randomBytes, timingSafeEqual } from 'node:crypto';
import { Op, QueryTypes, type Transaction } from 'sequelize';
import { freshReads, preparedRows } from '../db/raw';
import { ApiKey } from './api-key-model';
import type { Principal, Scope } from '../core/principal';

const KEY_PATTERN = /^lpk_([A-Za-z0-9]{12})_([A-Za-z0-9_-]{43})$/;

export interface IssuedKey {
  key: ApiKey;
  /** The full secret; returned to the caller once and never stored. */
  secret: string;
}

function hashSecret(secret: string): Buffer {
  return createHash('sha256').update(secret, 'utf8').digest();
}

function randomPrefix(): string {
  const alphabet = 'ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789';
  const bytes = randomBytes(12);
  return Array.from(bytes, (b) => alphabet[b % alphabet.length]).join('');
}

export async function issueApiKey(
  input: {
    organisationId: string;
    name: string;
    scopes: Scope[];
    expiresAt?: Date | null;
    createdBy?: string | null;
    /** The key that makes this one, if a key does. */
    parentKeyId?: string | null;
  },
  transaction?: Transaction,
): Promise<IssuedKey> {
  const prefix = randomPrefix();
  const secret = `lpk_${prefix}_${randomBytes(32).toString('base64url')}`;
  const key = await ApiKey.create({
    organisationId: input.organisationId,
    name: input.name,
    prefix,
    secretHash: hashSecret(secret),
    scopes: [...new Set(input.scopes)],
    expiresAt: input.expiresAt ?? null,
    createdBy: input.createdBy ?? null,
    parentKeyId: input.parentKeyId ?? null,
  }, { transaction });
  return { key, secret };
}

/** A live key, locked FOR SHARE until the transaction ends (it cannot be revoked meanwhile); null if revoked, expired or unknown. */
export async function lockLiveKey(organisationId: string, keyId: string, transaction: Transaction, now = new Date()): Promise<ApiKey | null> {
  const key = await ApiKey.findOne({ where: { id: keyId, organisationId }, lock: transaction.LOCK.SHARE, transaction });
  if (!key || key.revokedAt || (key.expiresAt && key.expiresAt.getTime() <= now.getTime())) return null;
  return key;
}

export type KeyCheck =
  | { ok: true; principal: Principal }
  | { ok: false; reason: 'malformed' | 'unknown' | 'revoked' | 'expired' };

interface KeyRow {
  id: string;
  organisation_id: string;
  secret_hash: Buffer;
  scopes: string[];
  expires_at: Date | string | null;
  revoked_at: Date | string | null;
  last_used_at: Date | string | null;
}
const KEY_BY_PREFIX = 'SELECT id, organisation_id, secret_hash, scopes, expires_at, revoked_at, last_used_at FROM api_keys WHERE prefix = $1';

// Concurrent requests with one key share a read issued after each of them arrived (see freshReads).
const keyByPrefix = freshReads(async (prefix: string) => {
  const rows = await preparedRows<KeyRow>(ApiKey.sequelize!, 'lotproof-api-key-by-prefix', KEY_BY_PREFIX, [prefix]);
  return rows[0];
});

/** Checks a presented bearer secret against the stored hash; every request reads the row, so a revocation takes effect at once. */
export async function verifyApiKey(secret: string, now = new Date()): Promise<KeyCheck> {
  const m = KEY_PATTERN.exec(secret);
  if (!m) return { ok: false, reason: 'malformed' };
  // A raw prepared statement (no model instance), still one read of the row per request.
  const key = await keyByPrefix(m[1]!);
  if (!key) return { ok: false, reason: 'unknown' };
  const presented = hashSecret(secret);
  const stored = Buffer.isBuffer(key.secret_hash) ? key.secret_hash : Buffer.from(key.secret_hash as unknown as string);
  if (stored.length !== presented.length || !timingSafeEqual(stored, presented)) {
    return { ok: false, reason: 'unknown' };
  }
  if (key.revoked_at) return { ok: false, reason: 'revoked' };
  if (key.expires_at && new Date(key.expires_at).getTime() <= now.getTime()) return { ok: false, reason: 'expired' };
  // Record use at most once a minute per key, so a busy key does not write on every request (nor
  // send the conditional UPDATE at all while the row just read says it was used this minute).
  if (!key.last_used_at || new Date(key.last_used_at).getTime() < now.getTime() - 60_000) void ApiKey.update(
    { lastUsedAt: now },
    {
      where: {
        id: key.id,
        [Op.or]: [{ lastUsedAt: null }, { lastUsedAt: { [Op.lt]: new Date(now.getTime() - 60_000) } }],
      },
    },
  ).catch(() => {});
  return {
    ok: true,
    principal: { organisationId: key.organisation_id, kind: 'api-key', scopes: key.scopes as Scope[], keyId: key.id },
  };
}

export interface RevokedDescendant {
  id: string;
  name: string;
  prefix: string;
  parentKeyId: string;
}

const REVOKE_DESCENDANTS = `
  WITH RECURSIVE descendants AS (
    SELECT id FROM api_keys WHERE parent_key_id = $1 AND organisation_id = $2
    UNION ALL
    SELECT k.id FROM api_keys k JOIN descendants d ON k.parent_key_id = d.id
  )
  UPDATE api_keys k SET revoked_at = $3
    FROM descendants d
   WHERE k.id = d.id AND k.revoked_at IS NULL
  RETURNING k.id, k.name, k.prefix, k.parent_key_id AS "parentKeyId"`;

/**
 * Revokes a key and, in the same transaction, every key it made and they made in turn (also under a
 * parent revoked before). `wasLive` says whether the key itself was live until now.
 */
export async function revokeApiKey(
  organisationId: string,
  keyId: string,
  transaction: Transaction,
): Promise<{ key: ApiKey; wasLive: boolean; descendants: RevokedDescendant[] } | null> {
  const key = await ApiKey.findOne({ where: { id: keyId, organisationId }, lock: transaction.LOCK.UPDATE, transaction });
  if (!key) return null;
  const now = new Date();
  const wasLive = !key.revokedAt;
  if (wasLive) await key.update({ revokedAt: now }, { transaction });
  const descendants = await ApiKey.sequelize!.query<RevokedDescendant>(REVOKE_DESCENDANTS, {
    bind: [key.id, organisationId, now],
    type: QueryTypes.SELECT,
    transaction,
  });
  return { key, wasLive, descendants };
}

export async function listApiKeys(organisationId: string): Promise<ApiKey[]> {
  return ApiKey.findAll({ where: { organisationId }, order: [['createdAt', 'DESC']] });
}
