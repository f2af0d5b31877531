// The outbox drain: moves webhook deliveries and alert e-mails, written in each verdict's own
// transaction, into the job queue — in the same transaction that marks them queued, so each is
// queued once even with many processes.
//
// Webhooks are handed out fairly. Only deliveries that are due count (a failed attempt puts its
// delivery back with a due time after its back-off), and at most `perEndpoint` of one endpoint and
// `perOrganisation` of one organisation are in flight (queued, not yet finished) at any time,
// across all processes; what is handed out is interleaved across organisations. So a receiver that
// never answers holds a few workers of its own tenant, never the queue: another tenant's event goes
// out at once. One drain runs at a time across all processes (an advisory lock), so the caps hold.
//
// The recovery sweep re-queues what a crash left behind: an attempt in flight for longer than any
// attempt can take is closed as cut short, and a job queued long ago and never started is queued
// again (under a new token, so a late copy of the old job does nothing).
import type PgBoss from 'pg-boss';
import type pg from 'pg';
import { CUT_SHORT } from './webhook-delivery';

export const WEBHOOK_QUEUE = 'webhook-delivery';
export const EMAIL_QUEUE = 'alert-email';

/** Advisory-lock class of the drain (the ledger's chains use 7820, idempotency keys 7821). */
const DRAIN_LOCK: readonly [number, number] = [7822, 1];

export interface DrainLimits {
  /** Deliveries of one endpoint in flight at once, across every process. */
  perEndpoint: number;
  /** Deliveries of one organisation in flight at once, across every process. */
  perOrganisation: number;
  /** Rows handed out per transaction. */
  page: number;
}

export interface QueueOptions {
  webhook: { retryLimit: number; retryDelay: number; retryBackoff: boolean; expireInSeconds: number };
  email: { retryLimit: number; retryDelay: number; retryBackoff: boolean };
}

// The due deliveries to hand out now, fairly. Endpoints with anything waiting are found by a loose
// index scan (one index probe each, not a scan of the backlog); each endpoint offers its oldest due
// deliveries up to its free share, each organisation takes its free share of those, round-robin
// across endpoints; and organisations are interleaved by rank in what is handed out.
const FAIR_PAGE_SQL = `
  WITH RECURSIVE waiting(endpoint_id) AS (
    (SELECT endpoint_id FROM webhook_deliveries WHERE enqueued_at IS NULL AND status = 'pending' ORDER BY endpoint_id LIMIT 1)
    UNION ALL
    SELECT (SELECT d.endpoint_id FROM webhook_deliveries d
             WHERE d.enqueued_at IS NULL AND d.status = 'pending' AND d.endpoint_id > w.endpoint_id
             ORDER BY d.endpoint_id LIMIT 1)
      FROM waiting w WHERE w.endpoint_id IS NOT NULL
  ), busy AS (
    SELECT endpoint_id, organisation_id, count(*)::int AS n
      FROM webhook_deliveries WHERE enqueued_at IS NOT NULL AND status = 'pending'
     GROUP BY endpoint_id, organisation_id
  ), busy_org AS (
    SELECT organisation_id, sum(n)::int AS n FROM busy GROUP BY organisation_id
  ), offered AS (
    SELECT o.id, o.organisation_id, o.due_at, o.endpoint_rank
      FROM waiting w
      LEFT JOIN busy b ON b.endpoint_id = w.endpoint_id
      CROSS JOIN LATERAL (
        SELECT d.id, d.organisation_id, d.due_at, row_number() OVER (ORDER BY d.due_at) AS endpoint_rank
          FROM webhook_deliveries d
         WHERE d.endpoint_id = w.endpoint_id AND d.enqueued_at IS NULL AND d.status = 'pending' AND d.due_at <= now()
         ORDER BY d.due_at
         LIMIT greatest($1::int - coalesce(b.n, 0), 0)
      ) o
     WHERE w.endpoint_id IS NOT NULL
  ), ranked AS (
    SELECT f.*, row_number() OVER (PARTITION BY f.organisation_id ORDER BY f.endpoint_rank, f.due_at, f.id) AS organisation_rank
      FROM offered f
  ), chosen AS (
    SELECT r.id, r.organisation_rank, r.due_at
      FROM ranked r LEFT JOIN busy_org bo ON bo.organisation_id = r.organisation_id
     WHERE r.organisation_rank <= $2::int - coalesce(bo.n, 0)
     ORDER BY r.organisation_rank, r.due_at
     LIMIT $3::int
  )
  UPDATE webhook_deliveries d SET enqueued_at = now(), job_token = gen_random_uuid()
    FROM chosen c
   WHERE d.id = c.id AND d.enqueued_at IS NULL AND d.status = 'pending'
  RETURNING d.id, d.job_token`;

/**
 * One drain transaction: hands out a fair page of due webhook deliveries and a page of alert
 * e-mails as queued jobs. Returns how many of each it queued.
 */
export async function drainOnce(client: pg.PoolClient, boss: PgBoss, limits: DrainLimits, queues: QueueOptions): Promise<{ webhooks: number; emails: number }> {
  await client.query('BEGIN');
  try {
    await client.query("SET LOCAL lock_timeout = '5s'");
    await client.query('SELECT pg_advisory_xact_lock($1, $2)', [...DRAIN_LOCK]);
    const db = { executeSql: (text: string, values: unknown[]) => client.query(text, values) };
    const hooks = await client.query<{ id: string; job_token: string }>({ name: 'lotproof-outbox-fair-page', text: FAIR_PAGE_SQL, values: [limits.perEndpoint, limits.perOrganisation, limits.page] });
    const mails = await client.query<{ id: string }>(
      `UPDATE alert_emails SET enqueued_at = now()
        WHERE id IN (SELECT id FROM alert_emails WHERE enqueued_at IS NULL ORDER BY created_at LIMIT $1 FOR UPDATE SKIP LOCKED)
       RETURNING id`,
      [limits.page],
    );
    const jobs = [
      ...hooks.rows.map((r) => ({ name: WEBHOOK_QUEUE, data: { deliveryId: r.id, token: r.job_token }, ...queues.webhook })),
      ...mails.rows.map((r) => ({ name: EMAIL_QUEUE, data: { emailId: r.id }, ...queues.email })),
    ];
    if (jobs.length > 0) await boss.insert(jobs, { db });
    await client.query('COMMIT');
    return { webhooks: hooks.rows.length, emails: mails.rows.length };
  } catch (err) {
    await client.query('ROLLBACK').catch(() => {});
    throw err;
  }
}

/**
 * Re-queues what a crash left behind. `attemptSeconds`: longer than any attempt can take (the
 * receiver's timeout and the time to record the outcome); `queuedSeconds`: longer than a queued
 * job waits for a worker. Returns how many deliveries it put back.
 */
export async function recoverStalled(client: pg.PoolClient, attemptSeconds: number, queuedSeconds: number): Promise<number> {
  const cut = await client.query(
    `WITH stale AS (
       UPDATE webhook_attempts SET in_flight = false, error = $1
        WHERE in_flight AND attempted_at < now() - make_interval(secs => $2::double precision)
       RETURNING delivery_id
     )
     UPDATE webhook_deliveries d SET enqueued_at = NULL, job_token = NULL, due_at = now()
       FROM stale WHERE d.id = stale.delivery_id AND d.status = 'pending'`,
    [CUT_SHORT, attemptSeconds],
  );
  const lost = await client.query(
    `UPDATE webhook_deliveries d SET enqueued_at = NULL, job_token = NULL, due_at = now()
      WHERE d.enqueued_at IS NOT NULL AND d.status = 'pending' AND d.enqueued_at < now() - make_interval(secs => $1::double precision)
        AND NOT EXISTS (SELECT 1 FROM webhook_attempts a WHERE a.delivery_id = d.id AND a.attempted_at >= d.enqueued_at)`,
    [queuedSeconds],
  );
  return (cut.rowCount ?? 0) + (lost.rowCount ?? 0);
}
