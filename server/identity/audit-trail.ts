// The admin audit trail: who did what to keys, users and invitations, products and webhooks, and
// failed sign-ins — who, when, from where; a change names the before and after of each field it
// changed (`details.changes`: [{ field, before, after }]). Written by the identity services and, in
// their own transactions, by the products and webhooks areas; read by admins and auditors.
import { Op, type Transaction, type WhereOptions } from 'sequelize';
import { ApiKey } from './api-key-model';
import { AuditEvent, User } from './models';
import { InvalidInput } from '../core/errors';
import type { Principal } from '../core/principal';

export const AUDIT_ACTIONS = [
  'key.created',
  'key.revoked',
  'user.invited',
  'invitation.revoked',
  'invitation.accepted',
  'user.role-changed',
  'user.removed',
  'user.signed-in',
  'user.sign-in-failed',
  'user.password-reset-requested',
  'user.password-reset',
  'organisation.created',
  'webhook.created',
  'webhook.updated',
  'webhook.deleted',
  'webhook.tested',
  'witness.added',
  'witness.removed',
  'checkpoint.issued',
  'ledger.walk-started',
  'product.created',
  'product.updated',
  'product.archived',
  'verdict.withdrawn',
] as const;
export type AuditAction = (typeof AUDIT_ACTIONS)[number];

/** Who acted, and from where; services get this instead of the request. */
export interface Actor {
  principal?: Principal;
  /** For actions without a credential: the operator CLI, or an anonymous caller (sign-in, accept). */
  kind?: 'operator' | 'anonymous';
  label?: string;
  ip?: string | null;
}

async function describeActor(actor: Actor, transaction?: Transaction): Promise<{ actorKind: string; actorId: string | null; actorLabel: string }> {
  const p = actor.principal;
  if (p?.kind === 'session' && p.userId) {
    const user = await User.findByPk(p.userId, { attributes: ['email'], transaction });
    return { actorKind: 'user', actorId: p.userId, actorLabel: actor.label ?? user?.email ?? '' };
  }
  if (p?.kind === 'api-key' && p.keyId) {
    const key = await ApiKey.findByPk(p.keyId, { attributes: ['name', 'prefix'], transaction });
    return { actorKind: 'api-key', actorId: p.keyId, actorLabel: actor.label ?? (key ? `${key.name} (lpk_${key.prefix}…)` : '') };
  }
  return { actorKind: actor.kind ?? 'anonymous', actorId: null, actorLabel: actor.label ?? '' };
}

/**
 * The same event written through a raw PostgreSQL client, inside a transaction opened on it (the
 * ledger's checkpoint hooks run on one): who acted is looked up first, outside that transaction.
 */
export async function recordAuditOn(
  conn: { query(text: string, values: unknown[]): Promise<unknown> },
  organisationId: string,
  actor: Awaited<ReturnType<typeof describeActor>> & { ip: string | null },
  action: AuditAction,
  target: { kind: string; id: string | null } | null,
  details: Record<string, unknown> = {},
): Promise<void> {
  await conn.query(
    `INSERT INTO audit_events (id, organisation_id, action, actor_kind, actor_id, actor_label, target_kind, target_id, ip, details)
     VALUES (gen_random_uuid(), $1, $2, $3, $4, $5, $6, $7, $8, $9)`,
    [organisationId, action, actor.actorKind, actor.actorId, actor.actorLabel, target?.kind ?? null, target?.id ?? null, actor.ip, JSON.stringify(details)],
  );
}

/** Who acted, as the audit trail names them (for recordAuditOn). */
export async function auditActor(actor: Actor): Promise<Awaited<ReturnType<typeof describeActor>> & { ip: string | null }> {
  return { ...(await describeActor(actor)), ip: actor.ip ?? null };
}

export async function recordAudit(
  organisationId: string,
  actor: Actor,
  action: AuditAction,
  target: { kind: string; id: string } | null,
  details: Record<string, unknown> = {},
  /** The change's own transaction: the event is written with it, or not at all. */
  transaction?: Transaction,
): Promise<void> {
  await AuditEvent.create({
    organisationId,
    action,
    ...(await describeActor(actor, transaction)),
    targetKind: target?.kind ?? null,
    targetId: target?.id ?? null,
    ip: actor.ip ?? null,
    details,
  }, { transaction });
}

export interface AuditEventView {
  id: string;
  at: string;
  action: string;
  actor: { kind: string; id: string | null; label: string };
  target: { kind: string; id: string } | null;
  ip: string | null;
  details: Record<string, unknown>;
}

function encodeCursor(e: AuditEvent): string {
  return Buffer.from(`${e.at.toISOString()}|${e.id}`, 'utf8').toString('base64url');
}

function decodeCursor(cursor: string): { at: Date; id: string } {
  const [at, id] = Buffer.from(cursor, 'base64url').toString('utf8').split('|');
  const date = new Date(at ?? '');
  if (!id || !/^[0-9a-f-]{36}$/.test(id) || Number.isNaN(date.getTime())) {
    throw new InvalidInput('The cursor is not one this server issued.', [{ field: '/cursor', detail: 'unknown cursor' }]);
  }
  return { at: date, id };
}

/** The organisation's audit events, newest first, with cursor pagination. */
export async function listAudit(
  organisationId: string,
  query: { limit: number; cursor?: string; action?: string },
): Promise<{ items: AuditEventView[]; nextCursor: string | null }> {
  const where: WhereOptions[] = [{ organisationId }];
  if (query.action) where.push({ action: query.action });
  if (query.cursor) {
    const c = decodeCursor(query.cursor);
    where.push({ [Op.or]: [{ at: { [Op.lt]: c.at } }, { at: c.at, id: { [Op.lt]: c.id } }] });
  }
  const rows = await AuditEvent.findAll({ where: { [Op.and]: where }, order: [['at', 'DESC'], ['id', 'DESC']], limit: query.limit + 1 });
  const page = rows.slice(0, query.limit);
  return {
    items: page.map((e) => ({
      id: e.id,
      at: e.at.toISOString(),
      action: e.action,
      actor: { kind: e.actorKind, id: e.actorId, label: e.actorLabel },
      target: e.targetKind && e.targetId ? { kind: e.targetKind, id: e.targetId } : null,
      ip: e.ip,
      details: e.details,
    })),
    nextCursor: rows.length > query.limit ? encodeCursor(page[page.length - 1]!) : null,
  };
}
