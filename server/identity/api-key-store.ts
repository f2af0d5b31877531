// API keys: issued with scopes, shown once, stored as a SHA-256 hash with a short visible prefix.
// A key is high-entropy random, so a fast hash is the right tool here (a slow password hash is for
// low-entropy secrets such as passwords).
//
// Persistence: the ApiKey model issues, lists and revokes; the check of a presented key, on every
// request, reads the row with a raw prepared statement (db/raw.ts) instead, as no model instance
// is needed there and the read is the hottest of the server.
import { createHash, randomBytes, timingSafeEqual } from 'node:crypto';
import { Op } from 'sequelize';
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

export async function issueApiKey(input: {
  organisationId: string;
  name: string;
  scopes: Scope[];
  expiresAt?: Date | null;
  createdBy?: string | null;
}): Promise<IssuedKey> {
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
  });
  return { key, secret };
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

export async function revokeApiKey(organisationId: string, keyId: string): Promise<ApiKey | null> {
  const key = await ApiKey.findOne({ where: { id: keyId, organisationId } });
  if (!key) return null;
  if (!key.revokedAt) await key.update({ revokedAt: new Date() });
  return key;
}

export async function listApiKeys(organisationId: string): Promise<ApiKey[]> {
  return ApiKey.findAll({ where: { organisationId }, order: [['createdAt', 'DESC']] });
}
