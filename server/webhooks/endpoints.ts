// Webhook endpoints per organisation, their delivery log, and test events. Deliveries themselves
// are made by the job in server/jobs/webhook-delivery.ts; signing follows the Standard Webhooks
// specification (webhook-id, webhook-timestamp, webhook-signature) with the `standardwebhooks` package.
import { randomBytes, randomUUID } from 'node:crypto';
import { isIP } from 'node:net';
import ipaddr from 'ipaddr.js';
import { QueryTypes, type Sequelize } from 'sequelize';
import type { components } from '../../shared/api/schema';
import { InvalidInput, NotFound } from '../core/errors';
import { WebhookEndpoint } from './models';
import { decodeCursor, encodeCursor } from '../core/cursor';
import { ledgerEvents } from '../verdicts/ledger';
import { TEST_EVENT } from '../verdicts/notifications';
import type { Principal } from '../core/principal';
import { isSealed, type SecretBox } from '../core/secret-box';
import { forEachStoredReply } from '../core/idempotency';

type EndpointView = components['schemas']['WebhookEndpoint'];
type DeliveryView = components['schemas']['WebhookDelivery'];
type WebhookInput = components['schemas']['WebhookInput'];
type WebhookPatch = components['schemas']['WebhookPatch'];

function view(e: WebhookEndpoint): EndpointView {
  return {
    id: e.id,
    url: e.url,
    events: e.events as EndpointView['events'],
    description: e.description,
    enabled: e.enabled,
    createdAt: e.createdAt.toISOString(),
    updatedAt: e.updatedAt.toISOString(),
  };
}

/**
 * True for an IP address that is not plain global unicast: loopback, private, shared, link-local,
 * multicast, broadcast, benchmarking, documentation and other reserved ranges, and IPv6 forms that
 * carry or translate to an IPv4 address (mapped, NAT64, 6to4, Teredo). The range table is ipaddr.js's
 * (the parser Express itself uses for trust proxy).
 */
export function isPrivateAddress(ip: string): boolean {
  const h = ip.replace(/^\[|\]$/g, '');
  if (!isIP(h)) return false;
  const addr = ipaddr.parse(h);
  return addr.range() !== 'unicast';
}

/** True for hosts on loopback, link-local or private networks (refused unless allowed by config). */
export function isPrivateHost(hostname: string): boolean {
  const h = hostname.replace(/^\[|\]$/g, '').toLowerCase();
  if (h === 'localhost' || h.endsWith('.localhost') || h.endsWith('.local') || h.endsWith('.internal')) return true;
  return isPrivateAddress(h);
}

function checkUrl(url: string, allowPrivate: boolean): void {
  let u: URL;
  try {
    u = new URL(url);
  } catch {
    throw new InvalidInput('the url is not a valid URL', [{ field: '/url', detail: 'not a URL' }]);
  }
  if (u.username || u.password) throw new InvalidInput('the url must not carry credentials', [{ field: '/url', detail: 'credentials in URL' }]);
  if (!allowPrivate && (u.protocol !== 'https:' || isPrivateHost(u.hostname))) {
    throw new InvalidInput('webhook urls must be https:// on a public host', [{ field: '/url', detail: 'https on a public host required' }]);
  }
}

export function newWebhookSecret(): string {
  return `whsec_${randomBytes(32).toString('base64')}`;
}

/** Where an endpoint's signing secret is bound (the associated data of its sealed form). */
export function webhookSecretContext(endpointId: string): string {
  return `webhook-secret:${endpointId}`;
}

/** The endpoint's signing secret in clear, from its stored (sealed, or from before sealing, clear) form. */
export function openWebhookSecret(box: SecretBox, endpointId: string, stored: string): string {
  return isSealed(stored) ? box.open(stored, webhookSecretContext(endpointId)) : stored;
}

/**
 * The value sealed under the box's current key, from clear (versions before sealing) or from a
 * previous key; 'current' when it already is; 'unreadable' when no key known here opens it.
 */
function resealed(box: SecretBox, stored: string, context: string): string | 'current' | 'unreadable' {
  if (box.isCurrent(stored, context)) return 'current';
  try {
    return box.seal(isSealed(stored) ? box.open(stored, context) : stored, context);
  } catch {
    return 'unreadable';
  }
}

export interface ResealReport {
  resealed: number;
  /** Sealed under a key not known here: left as they are (their deliveries fail and say why). */
  unreadable: number;
}

/**
 * Seals under the current key whatever is not: endpoints' signing secrets and the stored replies
 * of idempotent endpoint creations (which show the secret), stored in clear by versions before
 * sealing or sealed under a previous key. Run at start and after a key rotation; idempotent.
 */
export async function resealWebhookSecrets(sequelize: Sequelize, box: SecretBox): Promise<ResealReport> {
  const report: ResealReport = { resealed: 0, unreadable: 0 };
  const apply = async (stored: string, context: string, write: (next: string) => Promise<unknown>) => {
    const next = resealed(box, stored, context);
    if (next === 'current') return;
    if (next === 'unreadable') return void report.unreadable++;
    await write(next);
    report.resealed++;
  };
  // Raw SQL beside the model here: a sweep over every organisation's endpoints, each written only
  // if its secret is still the one read (compare-and-set), without loading model instances.
  const rows = await sequelize.query<{ id: string; secret: string }>('SELECT id, secret FROM webhook_endpoints', { type: QueryTypes.SELECT });
  for (const r of rows) {
    await apply(r.secret, webhookSecretContext(r.id), (next) =>
      sequelize.query('UPDATE webhook_endpoints SET secret = $2 WHERE id = $1 AND secret = $3', { bind: [r.id, next, r.secret] }));
  }
  await forEachStoredReply(sequelize, 'createWebhook', apply);
  return report;
}

/** Creates an endpoint; its signing secret is returned this once and stored sealed. */
export async function createWebhook(principal: Principal, input: WebhookInput, allowPrivate: boolean, box: SecretBox): Promise<EndpointView & { secret: string }> {
  checkUrl(input.url, allowPrivate);
  const id = randomUUID();
  const secret = newWebhookSecret();
  const e = await WebhookEndpoint.create({
    id,
    organisationId: principal.organisationId,
    url: input.url,
    events: [...new Set(input.events)],
    description: input.description ?? '',
    enabled: input.enabled ?? true,
    secret: box.seal(secret, webhookSecretContext(id)),
  });
  return { ...view(e), secret };
}

async function find(principal: Principal, id: string): Promise<WebhookEndpoint> {
  const e = await WebhookEndpoint.findOne({ where: { id, organisationId: principal.organisationId, deletedAt: null } });
  if (!e) throw new NotFound(`no webhook endpoint ${id} in your organisation`);
  return e;
}

export async function listWebhooks(principal: Principal): Promise<{ items: EndpointView[] }> {
  const rows = await WebhookEndpoint.findAll({ where: { organisationId: principal.organisationId, deletedAt: null }, order: [['createdAt', 'DESC']] });
  return { items: rows.map(view) };
}

export async function getWebhook(principal: Principal, id: string): Promise<EndpointView> {
  return view(await find(principal, id));
}

export async function updateWebhook(principal: Principal, id: string, patch: WebhookPatch, allowPrivate: boolean): Promise<EndpointView> {
  const e = await find(principal, id);
  if (patch.url) checkUrl(patch.url, allowPrivate);
  await e.update({
    ...(patch.url ? { url: patch.url } : {}),
    ...(patch.events ? { events: [...new Set(patch.events)] } : {}),
    ...(patch.description !== undefined ? { description: patch.description } : {}),
    ...(patch.enabled !== undefined ? { enabled: patch.enabled } : {}),
    updatedAt: new Date(),
  });
  return view(e);
}

export async function deleteWebhook(principal: Principal, id: string): Promise<void> {
  const e = await find(principal, id);
  await e.update({ deletedAt: new Date(), enabled: false });
}

interface DeliveryRow {
  id: string;
  endpoint_id: string;
  verdict_id: string | null;
  event_type: string;
  status: DeliveryView['status'];
  attempts: number;
  last_status_code: number | null;
  created_at: Date;
  delivered_at: Date | null;
}

export async function sendTestWebhook(sequelize: Sequelize, principal: Principal, id: string): Promise<DeliveryView> {
  const e = await find(principal, id);
  const deliveryId = randomUUID();
  const now = new Date();
  const payload = JSON.stringify({
    type: TEST_EVENT,
    timestamp: now.toISOString(),
    data: { endpointId: e.id, message: 'A test event from Lotproof: your endpoint is reachable and can check the signature.' },
  });
  await sequelize.query(
    `INSERT INTO webhook_deliveries (id, organisation_id, endpoint_id, verdict_id, event_type, payload) VALUES ($1, $2, $3, NULL, $4, $5)`,
    { bind: [deliveryId, principal.organisationId, e.id, TEST_EVENT, payload] },
  );
  ledgerEvents.emit('appended');
  return {
    id: deliveryId,
    endpointId: e.id,
    verdictId: null,
    eventType: TEST_EVENT,
    status: 'pending',
    attempts: 0,
    lastStatusCode: null,
    createdAt: now.toISOString(),
    deliveredAt: null,
    attemptLog: [],
  };
}

export async function listDeliveries(
  sequelize: Sequelize,
  principal: Principal,
  id: string,
  opts: { limit: number; cursor?: string },
): Promise<{ items: DeliveryView[]; nextCursor: string | null }> {
  const e = await find(principal, id);
  const bind: unknown[] = [principal.organisationId, e.id];
  let sql = `SELECT id, endpoint_id, verdict_id, event_type, status, attempts, last_status_code, created_at, delivered_at
             FROM webhook_deliveries WHERE organisation_id = $1 AND endpoint_id = $2`;
  if (opts.cursor) {
    const [at, cid] = decodeCursor(opts.cursor, 2);
    bind.push(at, cid);
    sql += ` AND (created_at, id) < ($3::timestamptz, $4::uuid)`;
  }
  bind.push(opts.limit + 1);
  sql += ` ORDER BY created_at DESC, id DESC LIMIT $${bind.length}`;
  const rows = await sequelize.query<DeliveryRow>(sql, { bind, type: QueryTypes.SELECT });
  const page = rows.slice(0, opts.limit);
  const attempts = page.length
    ? await sequelize.query<{ delivery_id: string; attempt: number; attempted_at: Date; status_code: number | null; error: string | null; duration_ms: number }>(
        'SELECT delivery_id, attempt, attempted_at, status_code, error, duration_ms FROM webhook_attempts WHERE delivery_id = ANY($1::uuid[]) ORDER BY attempt',
        { bind: [page.map((r) => r.id)], type: QueryTypes.SELECT },
      )
    : [];
  const items = page.map((r) => ({
    id: r.id,
    endpointId: r.endpoint_id,
    verdictId: r.verdict_id,
    eventType: r.event_type,
    status: r.status,
    attempts: r.attempts,
    lastStatusCode: r.last_status_code,
    createdAt: new Date(r.created_at).toISOString(),
    deliveredAt: r.delivered_at ? new Date(r.delivered_at).toISOString() : null,
    attemptLog: attempts
      .filter((a) => a.delivery_id === r.id)
      .map((a) => ({ attempt: a.attempt, attemptedAt: new Date(a.attempted_at).toISOString(), statusCode: a.status_code, error: a.error, durationMs: a.duration_ms })),
  }));
  const last = page[page.length - 1];
  return { items, nextCursor: rows.length > opts.limit && last ? encodeCursor([new Date(last.created_at).toISOString(), last.id]) : null };
}
