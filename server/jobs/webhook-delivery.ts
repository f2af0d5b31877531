// Delivers webhooks: signs the stored payload per Standard Webhooks (webhook-id is the delivery id,
// so receivers can drop duplicates), POSTs it, and keeps the attempt log. The address is checked as
// it is connected to (webhook-post.ts).
//
// Each attempt is written before the POST (in flight) and completed after it, so an attempt cut
// short by a crash is still in the log, and the next attempt marks it "no outcome recorded". A
// receiver's failure is not an error of the job: the delivery goes back to the outbox with a due
// time after its back-off (outbox.ts hands it out again), or is marked failed after the last
// attempt. Only our own failures (the database) throw, and the queue retries the job.
//
// All SQL here runs on the job side's own pool (JobDb), never on the API's Sequelize pool, so
// deliveries never take the connections lots are sealed with.
import { Webhook } from 'standardwebhooks';
import type { Logger } from 'pino';
import type { Config } from '../config';
import { postWebhook, RefusedTarget } from './webhook-post';
import type { SecretBox } from '../core/secret-box';
import { openWebhookSecret } from '../webhooks/endpoints';

/** The job side's database: a node-postgres pool of its own (server/jobs/index.ts). */
export interface JobDb {
  query<R = Record<string, unknown>>(text: string, values?: unknown[]): Promise<{ rows: R[] }>;
}

export interface JobDeps {
  db: JobDb;
  config: Config;
  logger: Logger;
  /** Opens the endpoints' sealed signing secrets (made once per job runner). */
  secrets: SecretBox;
}

/** What a queued webhook job names: the delivery, and the token the outbox gave it when it queued it. */
export interface DeliveryJob {
  deliveryId: string;
  /** Absent on jobs queued before tokens (and on direct calls): matches a delivery without one. */
  token?: string | null;
}

export interface DeliveryOutcome {
  deliveryId: string;
  attempt: number;
  status: 'delivered' | 'pending' | 'failed';
  statusCode: number | null;
  error: string | null;
}

export const CUT_SHORT = 'no outcome recorded: the server stopped (or lost its database) during this attempt; it was made again';

interface Claimed {
  id: string;
  attempt: number;
  attempt_id: string;
  payload: string;
  endpoint_id: string;
  url: string;
  secret: string;
  enabled: boolean;
  deleted_at: Date | null;
}

// One statement for a batch of jobs: each delivery still pending under the job's token gets its
// next attempt number and an attempt row in flight; an attempt a crash left in flight is closed.
const CLAIM_SQL = `
  WITH wanted AS (
    SELECT w.id, w.token FROM json_to_recordset($1::json) AS w(id uuid, token uuid)
  ), claimed AS (
    UPDATE webhook_deliveries d
       SET attempts = d.attempts + 1, enqueued_at = coalesce(d.enqueued_at, now())
      FROM wanted w
     WHERE d.id = w.id AND d.status = 'pending' AND d.job_token IS NOT DISTINCT FROM w.token
    RETURNING d.id, d.attempts, d.payload, d.endpoint_id
  ), cut_short AS (
    UPDATE webhook_attempts a SET in_flight = false, error = $2
      FROM claimed c WHERE a.delivery_id = c.id AND a.in_flight
  ), started AS (
    INSERT INTO webhook_attempts (delivery_id, attempt, status_code, error, duration_ms, in_flight)
    SELECT id, attempts, NULL, NULL, 0, true FROM claimed
    RETURNING id, delivery_id
  )
  SELECT c.id, c.attempts AS attempt, s.id::text AS attempt_id, c.payload, e.id AS endpoint_id, e.url, e.secret, e.enabled, e.deleted_at
    FROM claimed c JOIN started s ON s.delivery_id = c.id JOIN webhook_endpoints e ON e.id = c.endpoint_id`;

// Attempts' outcomes, and their deliveries' state after them, many in one statement. An attempt
// already closed as cut short (the recovery sweep re-queued its delivery) still gets its real
// outcome; it moves the delivery only when that outcome is "delivered".
const FINISH_SQL = `
  WITH r AS (
    SELECT * FROM json_to_recordset($1::json)
      AS r(attempt_id bigint, status_code integer, error text, duration_ms integer, status text, due_in double precision)
  ), prev AS (
    SELECT a.id, a.delivery_id, a.in_flight FROM webhook_attempts a JOIN r ON r.attempt_id = a.id
  ), done AS (
    UPDATE webhook_attempts a SET status_code = r.status_code, error = r.error, duration_ms = r.duration_ms, in_flight = false
      FROM r WHERE a.id = r.attempt_id
  )
  UPDATE webhook_deliveries d
     SET last_status_code = r.status_code,
         status = r.status,
         delivered_at = CASE WHEN r.status = 'delivered' THEN now() ELSE d.delivered_at END,
         enqueued_at = CASE WHEN r.status = 'pending' THEN NULL ELSE d.enqueued_at END,
         job_token = CASE WHEN r.status = 'pending' THEN NULL ELSE d.job_token END,
         due_at = CASE WHEN r.status = 'pending' THEN now() + make_interval(secs => r.due_in) ELSE d.due_at END
    FROM prev JOIN r ON r.attempt_id = prev.id
   WHERE d.id = prev.delivery_id AND d.status = 'pending' AND (prev.in_flight OR r.status = 'delivered')`;

interface Finished {
  attempt_id: string;
  status_code: number | null;
  error: string | null;
  duration_ms: number;
  status: DeliveryOutcome['status'];
  due_in: number;
}

/**
 * Writes outcomes in batches: whatever finished while the previous write was under way goes in the
 * next one (one statement, one commit), so a busy worker does not pay a commit per delivery.
 */
function outcomeWriter(db: JobDb): (f: Finished) => Promise<void> {
  let waiting: Array<{ f: Finished; resolve: () => void; reject: (err: unknown) => void }> = [];
  let writing = false;
  const writeAll = async () => {
    writing = true;
    try {
      while (waiting.length > 0) {
        const batch = waiting.slice(0, 500);
        waiting = waiting.slice(500);
        try {
          await writeWithPatience(db, JSON.stringify(batch.map((b) => b.f)));
          for (const b of batch) b.resolve();
        } catch (err) {
          for (const b of batch) b.reject(err);
        }
      }
    } finally {
      writing = false;
    }
  };
  return (f) =>
    new Promise<void>((resolve, reject) => {
      waiting.push({ f, resolve, reject });
      if (!writing) void writeAll();
    });
}

const writers = new WeakMap<JobDb, (f: Finished) => Promise<void>>();

/** A wait that does not by itself keep a stopping process alive. */
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms).unref());

/**
 * A database that is briefly away (a restart) is waited for, so the outcome of a POST already made
 * is not lost; after about 30 s the jobs fail and are retried.
 */
async function writeWithPatience(db: JobDb, rows: string): Promise<void> {
  for (const wait of [500, 1_000, 2_000, 4_000, 8_000, 15_000, -1]) {
    try {
      await db.query(FINISH_SQL, [rows]);
      return;
    } catch (err) {
      if (wait < 0) throw err;
      await sleep(wait);
    }
  }
}

/** Seconds before attempt `attempt + 1`: the configured delay, doubled per attempt, at most an hour. */
export function backoffSeconds(config: Config, attempt: number): number {
  return Math.min(config.verdicts.webhookRetryDelaySeconds * 2 ** Math.max(0, attempt - 1), 3600);
}

/** Attempts in all: the first and `webhookRetryLimit` more. */
export function maxAttempts(config: Config): number {
  return config.verdicts.webhookRetryLimit + 1;
}

/** Claims the deliveries of a batch of jobs: those still to be made by these jobs, by delivery id. */
export async function claimDeliveries(deps: JobDeps, jobs: DeliveryJob[]): Promise<Map<string, Claimed>> {
  if (jobs.length === 0) return new Map();
  const wanted = JSON.stringify(jobs.map((j) => ({ id: j.deliveryId, token: j.token ?? null })));
  const { rows } = await deps.db.query<Claimed>(CLAIM_SQL, [wanted, CUT_SHORT]);
  return new Map(rows.map((r) => [r.id, r]));
}

/** Records an attempt's outcome (batched with others finishing at the same time). */
function finish(deps: JobDeps, c: Claimed, o: DeliveryOutcome, ms: number, dueInSeconds: number): Promise<void> {
  let write = writers.get(deps.db);
  if (!write) writers.set(deps.db, (write = outcomeWriter(deps.db)));
  return write({ attempt_id: c.attempt_id, status_code: o.statusCode, error: o.error, duration_ms: Math.round(ms), status: o.status, due_in: dueInSeconds });
}

/** Makes one claimed attempt: signs, POSTs, records the outcome. Throws only when the outcome cannot be written. */
export async function attemptDelivery(deps: JobDeps, c: Claimed): Promise<DeliveryOutcome> {
  const { config } = deps;
  const outcome = (status: DeliveryOutcome['status'], statusCode: number | null, error: string | null): DeliveryOutcome => ({ deliveryId: c.id, attempt: c.attempt, status, statusCode, error });
  const retryOrFail = (statusCode: number | null, error: string) => outcome(c.attempt >= maxAttempts(config) ? 'failed' : 'pending', statusCode, error);
  let result: DeliveryOutcome;
  let ms = 0;
  if (!c.enabled || c.deleted_at) {
    result = outcome('failed', null, 'the endpoint is disabled or removed');
  } else {
    let secret: string | null = null;
    try {
      secret = openWebhookSecret(deps.secrets, c.endpoint_id, c.secret);
    } catch {
      // Sealed under another key: every server sharing this database needs the same LOTPROOF_SECRETS_KEY.
      result = retryOrFail(null, 'the signing secret cannot be opened here: this server has another LOTPROOF_SECRETS_KEY than the one that stored it');
    }
    if (secret !== null) {
      const now = new Date();
      const signature = new Webhook(secret).sign(c.id, now, c.payload);
      const started = performance.now();
      let statusCode: number | null = null;
      let error: string | null = null;
      try {
        const res = await postWebhook(
          c.url,
          {
            'content-type': 'application/json',
            'user-agent': 'Lotproof-Webhooks/1',
            'webhook-id': c.id,
            'webhook-timestamp': String(Math.floor(now.getTime() / 1000)),
            'webhook-signature': signature,
          },
          c.payload,
          { timeoutMs: config.verdicts.webhookTimeoutMs, allowPrivate: config.verdicts.webhookAllowPrivateTargets },
        );
        statusCode = res.status;
        if (res.status < 200 || res.status >= 300) error = `the receiver answered HTTP ${res.status}`;
      } catch (err) {
        const e = err as Error;
        error = e.name === 'TimeoutError' ? `no answer within ${config.verdicts.webhookTimeoutMs} ms` : e instanceof RefusedTarget ? `refused: ${e.message}` : `could not connect: ${e.message}`;
      }
      ms = performance.now() - started;
      result = error ? retryOrFail(statusCode, error) : outcome('delivered', statusCode, null);
    }
  }
  await finish(deps, c, result!, ms, result!.status === 'pending' ? backoffSeconds(config, c.attempt) : 0);
  return result!;
}

/**
 * Starts a batch of jobs: one claim for all, then each delivery on its own. One promise per job,
 * in order: it resolves when the job is done (delivered, re-scheduled, failed, or nothing left to
 * do) and rejects when the database would not record it (the queue then retries the job).
 */
export function deliverWebhookBatch(deps: JobDeps, jobs: DeliveryJob[]): Promise<DeliveryOutcome | null>[] {
  const claimed = claimDeliveries(deps, jobs);
  return jobs.map((job) =>
    claimed.then((map) => {
      const c = map.get(job.deliveryId);
      return c ? attemptDelivery(deps, c) : null;
    }),
  );
}

/** Makes the next attempt of one delivery now (null when it is no longer pending under that token). */
export async function deliverWebhook(deps: JobDeps, deliveryId: string, token: string | null = null): Promise<DeliveryOutcome | null> {
  return (await deliverWebhookBatch(deps, [{ deliveryId, token }])[0]) ?? null;
}
