// API keys as admins see them: issue (the secret is returned once), list, read, revoke — each
// change written to the audit trail. Verification of presented keys is in api-key-store.ts.
import { ApiKey } from './api-key-model';
import { InvalidInput, NotAuthenticated, NotFound, Refused } from '../core/errors';
import { issueApiKey, listApiKeys, lockLiveKey, revokeApiKey } from './api-key-store';
import { recordAudit, type Actor } from './audit-trail';
import type { Principal, Scope } from '../core/principal';

export interface ApiKeyView {
  id: string;
  name: string;
  /** The visible start of the key, for recognition: "lpk_<prefix>_…". */
  prefix: string;
  scopes: Scope[];
  createdAt: string;
  expiresAt: string | null;
  revokedAt: string | null;
  lastUsedAt: string | null;
  status: 'active' | 'revoked' | 'expired';
}

export function apiKeyView(k: ApiKey, now = new Date()): ApiKeyView {
  return {
    id: k.id,
    name: k.name,
    prefix: `lpk_${k.prefix}`,
    scopes: k.scopes as Scope[],
    createdAt: k.createdAt.toISOString(),
    expiresAt: k.expiresAt?.toISOString() ?? null,
    revokedAt: k.revokedAt?.toISOString() ?? null,
    lastUsedAt: k.lastUsedAt?.toISOString() ?? null,
    status: k.revokedAt ? 'revoked' : k.expiresAt && k.expiresAt.getTime() <= now.getTime() ? 'expired' : 'active',
  };
}

export async function createKey(
  actor: Actor & { principal: Principal },
  input: { name: string; scopes: Scope[]; expiresAt?: string | null },
): Promise<{ key: ApiKeyView; secret: string }> {
  const name = input.name.trim();
  if (!name) throw new InvalidInput('The key needs a name.', [{ field: '/name', detail: 'empty' }]);
  const expiresAt = input.expiresAt ? new Date(input.expiresAt) : null;
  if (expiresAt && expiresAt.getTime() <= Date.now()) {
    throw new InvalidInput('expiresAt must be in the future.', [{ field: '/expiresAt', detail: 'in the past' }]);
  }
  // Least privilege: a key that manages keys may hand out only scopes it holds itself; an admin session may grant any.
  if (actor.principal.kind === 'api-key') {
    const beyond = input.scopes.filter((s) => !actor.principal.scopes.includes(s));
    if (beyond.length > 0) {
      throw new Refused(
        'scope-escalation',
        `An API key can only issue keys with scopes it holds itself; this key lacks ${beyond.join(', ')}. Ask an admin to issue it from the console.`,
        [{ field: '/scopes', detail: `not held by the issuing key: ${beyond.join(', ')}` }],
      );
    }
  }
  const { organisationId } = actor.principal;
  const createdBy = actor.principal.userId ?? actor.principal.keyId ?? null;
  return ApiKey.sequelize!.transaction(async (transaction) => {
    // A key made by a key hangs from it: it expires no later (unasked, it takes the parent's
    // expiry), and revoking the parent revokes it (api-key-store.ts). The parent stays locked until
    // the child is committed, so a revocation meanwhile waits for the child and takes it along.
    let parentKeyId: string | null = null;
    let expiry = expiresAt;
    if (actor.principal.kind === 'api-key' && actor.principal.keyId) {
      const parent = await lockLiveKey(organisationId, actor.principal.keyId, transaction);
      if (!parent) throw new NotAuthenticated('The API key has been revoked or has expired.');
      parentKeyId = parent.id;
      if (parent.expiresAt) {
        if (!expiry) expiry = parent.expiresAt;
        else if (expiry.getTime() > parent.expiresAt.getTime()) {
          throw new Refused(
            'expiry-beyond-parent',
            `A key made by an API key expires no later than that key, at ${parent.expiresAt.toISOString()}. Ask for that or an earlier expiry, or leave it out to get that one.`,
            [{ field: '/expiresAt', detail: `later than the issuing key's expiry ${parent.expiresAt.toISOString()}` }],
          );
        }
      }
    }
    const { key, secret } = await issueApiKey({ organisationId, name, scopes: input.scopes, expiresAt: expiry, createdBy, parentKeyId }, transaction);
    await recordAudit(
      organisationId,
      actor,
      'key.created',
      { kind: 'api-key', id: key.id },
      { name, scopes: key.scopes, prefix: `lpk_${key.prefix}`, ...(parentKeyId ? { parentKeyId } : {}) },
      transaction,
    );
    return { key: apiKeyView(key), secret };
  });
}

export async function listKeys(organisationId: string): Promise<ApiKeyView[]> {
  return (await listApiKeys(organisationId)).map((k) => apiKeyView(k));
}

export async function getKey(organisationId: string, keyId: string): Promise<ApiKeyView> {
  const key = await ApiKey.findOne({ where: { id: keyId, organisationId } });
  if (!key) throw new NotFound(`No API key ${keyId} in this organisation.`);
  return apiKeyView(key);
}

/**
 * Revokes at once (every process reads the key row on each request), together with every key it
 * made, and they made in turn: one transaction, one audit event per key ended.
 */
export async function revokeKey(actor: Actor & { principal: Principal }, keyId: string): Promise<ApiKeyView> {
  const { organisationId } = actor.principal;
  return ApiKey.sequelize!.transaction(async (transaction) => {
    const revoked = await revokeApiKey(organisationId, keyId, transaction);
    if (!revoked) throw new NotFound(`No API key ${keyId} in this organisation.`);
    const { key } = revoked;
    if (revoked.wasLive) {
      await recordAudit(organisationId, actor, 'key.revoked', { kind: 'api-key', id: key.id }, { name: key.name, prefix: `lpk_${key.prefix}` }, transaction);
    }
    for (const d of revoked.descendants) {
      await recordAudit(
        organisationId,
        actor,
        'key.revoked',
        { kind: 'api-key', id: d.id },
        { name: d.name, prefix: `lpk_${d.prefix}`, reason: 'parent-revoked', parentKeyId: d.parentKeyId },
        transaction,
      );
    }
    return apiKeyView(key);
  });
}
