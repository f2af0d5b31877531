// Webhook endpoints per organisation, their delivery log, and test events. Deliveries themselves
// are made by the job in server/jobs/webhook-delivery.ts; signing follows the Standard Webhooks
// specification (webhook-id, webhook-timestamp, webhook-signature) with the `standardwebhooks` package.
import { randomBytes, randomUUID } from 'node:crypto';
import { isIP } from 'node:net';
import ipaddr from 'ipaddr.js';
import { QueryTypes, type Sequelize, type Transaction } from 'sequelize';
import type { components } from '../../shared/api/schema';
import { InvalidInput, NotAllowed, NotFound, TooMany } from '../core/errors';
import { WebhookEndpoint } from './models';

/** One transaction on the models' database (a change and its audit event). */
const inTransaction = <T>(work: (t: Transaction) => Promise<T>): Promise<T> => WebhookEndpoint.sequelize!.transaction(work);
import { decodeCursor, encodeCursor } from '../core/cursor';
import { ledgerEvents } from '../verdicts/ledger';
import { TEST_EVENT } from '../verdicts/notifications';
import { holdsAnyRole, type Principal } from '../core/principal';
import { isSealed, type SecretBox } from '../core/secret-box';
import { forEachStoredReply } from '../core/idempotency';
// The organisation's audit trail is the identity area's; webhook changes are written to it too.
import { recordAudit, type AuditAction } from '../identity/audit-trail';

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

// IPv6 ranges ipaddr.js leaves in 'unicast' that are no public host either, by name.
const MORE_IPV6_RANGES: Record<string, [ipaddr.IPv6, number]> = {
  // RFC 4291 §2.5.5.1 (deprecated): an IPv4 address in the low 32 bits, e.g. ::7f00:1 is 127.0.0.1
  ipv4Compatible: [ipaddr.IPv6.parse('::'), 96],
  // RFC 3879 (deprecated site-local), still routed inside some networks
  siteLocal: [ipaddr.IPv6.parse('fec0::'), 10],
  // RFC 8215: NAT64 prefix for local use, translating to IPv4 addresses of the local network
  localNat64: [ipaddr.IPv6.parse('64:ff9b:1::'), 48],
  // RFC 9637: documentation
  documentation: [ipaddr.IPv6.parse('3fff::'), 20],
};
// RFC 4291 §2.4, IANA: global unicast is allocated from 2000::/3 only.
const GLOBAL_UNICAST_V6: [ipaddr.IPv6, number] = [ipaddr.IPv6.parse('2000::'), 3];

/** The range an address belongs to: ipaddr.js's names, then ours; 'unicast' only for a public host. */
export function addressRange(ip: string): string {
  const addr = ipaddr.parse(ip);
  const named = addr.range();
  if (named !== 'unicast' || addr.kind() === 'ipv4') return named;
  const v6 = addr as ipaddr.IPv6;
  return ipaddr.subnetMatch(v6, MORE_IPV6_RANGES as Record<string, [ipaddr.IPv4 | ipaddr.IPv6, number]>, v6.match(GLOBAL_UNICAST_V6) ? 'unicast' : 'unallocated');
}

/**
 * True for an IP address that is not plain global unicast: loopback, private, shared, link-local,
 * multicast, broadcast, benchmarking, documentation and other reserved ranges, IPv6 forms that
 * carry or translate to an IPv4 address (mapped, compatible, NAT64 global and local, 6to4, Teredo),
 * site-local, and any IPv6 address outside 2000::/3. The range table is ipaddr.js's (the parser
 * Express itself uses for trust proxy) plus MORE_IPV6_RANGES.
 */
export function isPrivateAddress(ip: string): boolean {
  const h = ip.replace(/^\[|\]$/g, '');
  if (!isIP(h)) return false;
  return addressRange(h) !== 'unicast';
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

/**
 * Who may send verdict data to a receiver of their choosing: only a caller that may read verdicts
 * itself (the scopes and roles of getVerdict/listVerdicts in openapi/parts/verdicts.yaml). The
 * document's access rule says "any one of" these scopes; managing webhooks needs keys:manage there,
 * and this is the second condition: a keys:manage key without a verdict-reading scope can list,
 * pause, describe, test and remove endpoints (none of which sends verdict data anywhere new), but
 * not create one, nor point one at another URL, other events, or switch one on.
 */
const VERDICT_READING_SCOPES: readonly string[] = ['verdicts:read', 'audit:read'];
const VERDICT_READING_ROLES: readonly string[] = ['admin', 'quality', 'auditor'];

function mustReadVerdicts(principal: Principal, what: string): void {
  const ok = principal.kind === 'api-key'
    ? principal.scopes.some((s) => VERDICT_READING_SCOPES.includes(s))
    : holdsAnyRole(principal, VERDICT_READING_ROLES);
  if (!ok) {
    throw new NotAllowed(
      `${what} sends verdict data to the endpoint, so it needs an API key that may also read verdicts (verdicts:read or audit:read) besides keys:manage.`,
    );
  }
}

/** Where a request came from, for the audit trail (the principal itself is passed beside it). */
export interface RequestOrigin {
  ip?: string | null;
}

/** A URL as the audit trail keeps it: without query and fragment, which may carry a receiver's token. */
function auditedUrl(url: string): string {
  try {
    const u = new URL(url);
    return `${u.origin}${u.pathname}`;
  } catch {
    return '';
  }
}

/** The change's audit event, written in the change's own transaction: both are stored, or neither. */
function audit(principal: Principal, from: RequestOrigin, action: AuditAction, endpointId: string, details: Record<string, unknown>, transaction: Transaction): Promise<void> {
  return recordAudit(principal.organisationId, { principal, ip: from.ip ?? null }, action, { kind: 'webhook', id: endpointId }, details, transaction);
}

/** A test event per endpoint at most this often (a test is a POST to a URL the caller chose). */
export const TEST_EVENT_INTERVAL_SECONDS = 5;

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
export async function createWebhook(principal: Principal, input: WebhookInput, allowPrivate: boolean, box: SecretBox, from: RequestOrigin = {}): Promise<EndpointView & { secret: string }> {
  mustReadVerdicts(principal, 'Creating a webhook endpoint');
  checkUrl(input.url, allowPrivate);
  const id = randomUUID();
  const secret = newWebhookSecret();
  const e = await inTransaction(async (transaction) => {
    const made = await WebhookEndpoint.create(
      {
        id,
        organisationId: principal.organisationId,
        url: input.url,
        events: [...new Set(input.events)],
        description: input.description ?? '',
        enabled: input.enabled ?? true,
        secret: box.seal(secret, webhookSecretContext(id)),
      },
      { transaction },
    );
    await audit(principal, from, 'webhook.created', made.id, { url: auditedUrl(made.url), events: made.events, enabled: made.enabled }, transaction);
    return made;
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

export async function updateWebhook(principal: Principal, id: string, patch: WebhookPatch, allowPrivate: boolean, from: RequestOrigin = {}): Promise<EndpointView> {
  const e = await find(principal, id);
  if (patch.url !== undefined || patch.events !== undefined || patch.enabled === true) mustReadVerdicts(principal, 'Changing where or which events a webhook endpoint sends, or switching it on,');
  if (patch.url) checkUrl(patch.url, allowPrivate);
  const changed = (['url', 'events', 'description', 'enabled'] as const).filter((k) => patch[k] !== undefined);
  // What each changed field was and became; a URL shown as the audit trail keeps it, without its query.
  const raw = (x: WebhookEndpoint) => ({ url: x.url, events: [...x.events], description: x.description, enabled: x.enabled });
  const before = raw(e);
  await inTransaction(async (transaction) => {
    await e.update(
      {
        ...(patch.url ? { url: patch.url } : {}),
        ...(patch.events ? { events: [...new Set(patch.events)] } : {}),
        ...(patch.description !== undefined ? { description: patch.description } : {}),
        ...(patch.enabled !== undefined ? { enabled: patch.enabled } : {}),
        updatedAt: new Date(),
      },
      { transaction },
    );
    const after = raw(e);
    const changes = changed
      .filter((k) => JSON.stringify(before[k]) !== JSON.stringify(after[k]))
      .map((k) => {
        if (k !== 'url') return { field: `/${k}`, before: before[k], after: after[k] };
        const [was, is] = [auditedUrl(before.url), auditedUrl(after.url)];
        return { field: '/url', before: was, after: is, ...(was === is ? { detail: 'only the query changed (not kept: it may carry a token)' } : {}) };
      });
    await audit(
      principal,
      from,
      'webhook.updated',
      e.id,
      {
        changed,
        changes,
        ...(patch.url ? { url: auditedUrl(e.url) } : {}),
        ...(patch.events ? { events: e.events } : {}),
        ...(patch.enabled !== undefined ? { enabled: e.enabled } : {}),
      },
      transaction,
    );
  });
  return view(e);
}

export async function deleteWebhook(principal: Principal, id: string, from: RequestOrigin = {}): Promise<void> {
  const e = await find(principal, id);
  await inTransaction(async (transaction) => {
    await e.update({ deletedAt: new Date(), enabled: false }, { transaction });
    await audit(principal, from, 'webhook.deleted', e.id, { url: auditedUrl(e.url) }, transaction);
  });
}

/** How the log shows an attempt written before its POST and not completed (yet). */
const IN_FLIGHT = 'no outcome yet: the attempt is under way, or its server stopped during it (then it is made again)';

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

export async function sendTestWebhook(sequelize: Sequelize, principal: Principal, id: string, from: RequestOrigin = {}): Promise<DeliveryView> {
  const e = await find(principal, id);
  // Raw SQL beside the model here: the limit is one compare-and-set on the endpoint's last test,
  // so concurrent requests (or processes) cannot both pass it.
  const deliveryId = randomUUID();
  const now = new Date();
  await sequelize.transaction(async (transaction) => {
    const [allowed] = await sequelize.query(
      `UPDATE webhook_endpoints SET last_test_at = now()
        WHERE id = $1 AND organisation_id = $2 AND (last_test_at IS NULL OR last_test_at <= now() - make_interval(secs => $3))
       RETURNING id`,
      { bind: [e.id, principal.organisationId, TEST_EVENT_INTERVAL_SECONDS], transaction },
    );
    if ((allowed as unknown[]).length === 0) {
      const [rows] = await sequelize.query(
        'SELECT greatest(1, ceil(extract(epoch FROM last_test_at + make_interval(secs => $2) - now())))::int AS wait FROM webhook_endpoints WHERE id = $1',
        { bind: [e.id, TEST_EVENT_INTERVAL_SECONDS], transaction },
      );
      const wait = (rows as Array<{ wait: number }>)[0]?.wait ?? TEST_EVENT_INTERVAL_SECONDS;
      throw new TooMany(`A test event went to this endpoint less than ${TEST_EVENT_INTERVAL_SECONDS} s ago; send the next one in ${wait} s.`, wait);
    }
    const payload = JSON.stringify({
      type: TEST_EVENT,
      timestamp: now.toISOString(),
      data: { endpointId: e.id, message: 'A test event from Lotproof: your endpoint is reachable and can check the signature.' },
  });
  await sequelize.query(
    `INSERT INTO webhook_deliveries (id, organisation_id, endpoint_id, verdict_id, event_type, payload) VALUES ($1, $2, $3, NULL, $4, $5)`,
    { bind: [deliveryId, principal.organisationId, e.id, TEST_EVENT, payload], transaction },
  );
  await audit(principal, from, 'webhook.tested', e.id, { deliveryId }, transaction);
  });
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
    ? await sequelize.query<{ delivery_id: string; attempt: number; attempted_at: Date; status_code: number | null; error: string | null; duration_ms: number; in_flight: boolean }>(
        'SELECT delivery_id, attempt, attempted_at, status_code, error, duration_ms, in_flight FROM webhook_attempts WHERE delivery_id = ANY($1::uuid[]) ORDER BY attempt',
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
      .map((a) => ({ attempt: a.attempt, attemptedAt: new Date(a.attempted_at).toISOString(), statusCode: a.status_code, error: a.in_flight ? IN_FLIGHT : a.error, durationMs: a.duration_ms })),
  }));
  const last = page[page.length - 1];
  return { items, nextCursor: rows.length > opts.limit && last ? encodeCursor([new Date(last.created_at).toISOString(), last.id]) : null };
}
