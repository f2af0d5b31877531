// API keys as admins see them: issue (the secret is returned once), list, read, revoke — each
// change written to the audit trail. Verification of presented keys is in api-keys.ts.
import { ApiKey } from './api-key-model';
import { InvalidInput, NotFound, Refused } from '../core/errors';
import { issueApiKey, listApiKeys, revokeApiKey } from './api-key-store';
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
  const createdBy = actor.principal.userId ?? actor.principal.keyId ?? null;
  const { key, secret } = await issueApiKey({ organisationId: actor.principal.organisationId, name, scopes: input.scopes, expiresAt, createdBy });
  await recordAudit(actor.principal.organisationId, actor, 'key.created', { kind: 'api-key', id: key.id }, { name, scopes: key.scopes, prefix: `lpk_${key.prefix}` });
  return { key: apiKeyView(key), secret };
}

export async function listKeys(organisationId: string): Promise<ApiKeyView[]> {
  return (await listApiKeys(organisationId)).map((k) => apiKeyView(k));
}

export async function getKey(organisationId: string, keyId: string): Promise<ApiKeyView> {
  const key = await ApiKey.findOne({ where: { id: keyId, organisationId } });
  if (!key) throw new NotFound(`No API key ${keyId} in this organisation.`);
  return apiKeyView(key);
}

/** Revokes at once: every process reads the key row on each request. */
export async function revokeKey(actor: Actor & { principal: Principal }, keyId: string): Promise<ApiKeyView> {
  const before = await ApiKey.findOne({ where: { id: keyId, organisationId: actor.principal.organisationId } });
  const key = await revokeApiKey(actor.principal.organisationId, keyId);
  if (!key) throw new NotFound(`No API key ${keyId} in this organisation.`);
  if (before && !before.revokedAt) {
    await recordAudit(actor.principal.organisationId, actor, 'key.revoked', { kind: 'api-key', id: key.id }, { name: key.name, prefix: `lpk_${key.prefix}` });
  }
  return apiKeyView(key);
}
