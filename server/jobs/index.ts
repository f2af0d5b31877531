// The job side of a Lotproof process: a pg-boss queue in PostgreSQL, the outbox drain that hands
// rows written in each verdict's own transaction to the queue (fairly: outbox.ts), and the worker
// loops that deliver webhooks and alert e-mails (worker-loop.ts). Every process may run it.
//
// Connections: pg-boss has its own pool, and the drain and the deliveries' own SQL use one more
// small pool of the job side (`lotproof-jobs`); neither is the API's Sequelize pool, so webhooks
// never take the connections lots are sealed with.
//
// Nothing here may reject unheard: the drain catches and logs its errors, the worker loops record
// job outcomes themselves and catch those errors, and pg-boss's and the pools' 'error' events are
// logged. A database outage makes the job side wait and try again, never end the process.
import PgBoss from 'pg-boss';
import pg from 'pg';
import type { AppContext } from '../http/context';
import { ledgerEvents } from '../verdicts/ledger';
import { deliverAlertEmail } from './alert-email';
import { deliverWebhookBatch, type DeliveryJob, type JobDeps } from './webhook-delivery';
import { drainOnce, EMAIL_QUEUE, recoverStalled, WEBHOOK_QUEUE, type DrainLimits, type QueueOptions } from './outbox';
import { startWorkerLoop } from './worker-loop';
import { startCheckpointSchedule } from './checkpoint-schedule';
import { secretBox } from '../core/secret-box';

export { EMAIL_QUEUE, WEBHOOK_QUEUE } from './outbox';

/**
 * Webhook deliveries running at once in one process (they mostly wait on receivers). With the caps
 * below, another tenant's delivery waits for a free slot only while more than 256 / 32 = 8 tenants
 * each fill their whole share with receivers that do not answer.
 */
const WEBHOOK_CONCURRENCY = 256;
/**
 * Caps across all processes, on deliveries queued or under way (outbox.ts): per endpoint (also the
 * most connections one receiver gets from us at once) and per organisation. Measured with a fast
 * local receiver on 2 busy cores (tests/integration/faults-webhooks-throughput.test.ts): 8/16 gave
 * 175–205 deliveries/s, 16/32 gave 220–400/s, 32/64 no more than 16/32.
 */
const LIMITS: DrainLimits = { perEndpoint: 16, perOrganisation: 32, page: 500 };
const DRAIN_EVERY_MS = 2_000;
const RECOVER_EVERY_MS = 5_000;
/** A job queued this long and never started was lost (its process died between fetch and claim). */
const QUEUED_TOO_LONG_SECONDS = 600;

export interface RunningJobs {
  boss: PgBoss;
  /** Hands every due outbox row to the queue now (also runs on a timer, after each append and as work finishes). */
  drain: () => Promise<void>;
  stop: () => Promise<void>;
}

const describe = (err: unknown) => ({ message: String((err as Error)?.message ?? err).slice(0, 300) });

/**
 * Creating a queue is idempotent in pg-boss, but two processes creating the same queue on a fresh
 * database at the same moment can deadlock (or collide on its unique name) inside pg-boss's own
 * statements; PostgreSQL then aborts one of them. That one simply tries again, a little later.
 */
async function createQueueRetrying(create: () => Promise<unknown>): Promise<void> {
  for (let attempt = 1; ; attempt++) {
    try {
      await create();
      return;
    } catch (err) {
      const code = (err as { code?: string }).code;
      if (attempt >= 5 || (code !== '40P01' && code !== '23505' && code !== '40001')) throw err;
      await new Promise((r) => setTimeout(r, 50 * attempt + Math.random() * 100));
    }
  }
}

export async function startJobs(ctx: AppContext): Promise<RunningJobs> {
  const { logger, config } = ctx;
  const url = config.databaseUrl!;
  const v = config.verdicts;
  const boss = new PgBoss({ connectionString: url, schema: 'pgboss', max: 4, application_name: 'lotproof-jobs' });
  boss.on('error', (err) => logger.warn({ err: describe(err) }, 'job queue error'));
  await boss.start();
  // A webhook job is one attempt: receivers' failures are retried by the outbox (with back-off);
  // the queue retries a job only when our own side failed (the database), or after it expired
  // because its process died.
  const queues: QueueOptions = {
    webhook: { retryLimit: 5, retryDelay: 5, retryBackoff: true, expireInSeconds: Math.ceil(v.webhookTimeoutMs / 1000) + 60 },
    email: { retryLimit: v.webhookRetryLimit, retryDelay: v.webhookRetryDelaySeconds, retryBackoff: true },
  };
  await createQueueRetrying(() => boss.createQueue(WEBHOOK_QUEUE, { name: WEBHOOK_QUEUE, ...queues.webhook }));
  await createQueueRetrying(() => boss.createQueue(EMAIL_QUEUE, { name: EMAIL_QUEUE, ...queues.email }));
  const pool = new pg.Pool({ connectionString: url, max: 6, application_name: 'lotproof-jobs', connectionTimeoutMillis: 5_000, options: '-c synchronous_commit=off' });
  pool.on('error', (err) => logger.debug({ err: describe(err) }, 'job pool connection lost'));

  const deps: JobDeps = { db: pool, config, logger, secrets: secretBox(config) };
  let stopped = false;
  let lastRecovery = 0;
  let draining: Promise<void> | null = null;
  let again = false;

  const webhooks = startWorkerLoop<DeliveryJob>({
    boss,
    queue: WEBHOOK_QUEUE,
    logger,
    concurrency: WEBHOOK_CONCURRENCY,
    batchSize: 50,
    pollMs: 500,
    run: (jobs) => deliverWebhookBatch(deps, jobs.map((j) => j.data)),
    onSettled: () => void drain(),
  });
  const emails = startWorkerLoop<{ emailId: string }>({
    boss,
    queue: EMAIL_QUEUE,
    logger,
    concurrency: 4,
    batchSize: 4,
    pollMs: 1_000,
    run: (jobs) => jobs.map((j) => deliverAlertEmail(deps, j.data.emailId)),
  });

  const drainAll = async () => {
    const client = await pool.connect();
    let broken: Error | undefined;
    try {
      if (Date.now() - lastRecovery >= RECOVER_EVERY_MS) {
        lastRecovery = Date.now();
        const back = await recoverStalled(client, Math.ceil(v.webhookTimeoutMs / 1000) + 15, QUEUED_TOO_LONG_SECONDS);
        if (back > 0) logger.info({ deliveries: back }, 'webhook deliveries cut short or lost were queued again');
      }
      for (;;) {
        const n = await drainOnce(client, boss, LIMITS, queues);
        if (n.webhooks > 0) webhooks.wake();
        if (n.emails > 0) emails.wake();
        if (n.webhooks < LIMITS.page && n.emails < LIMITS.page) break;
      }
    } catch (err) {
      broken = err as Error; // a connection the database dropped is not given back to the pool
      throw err;
    } finally {
      client.release(broken);
    }
  };
  /** Never rejects: a failed drain is logged and tried again on the next occasion. */
  const drain = (): Promise<void> => {
    if (stopped) return Promise.resolve();
    if (draining) {
      again = true;
      return draining;
    }
    draining = (async () => {
      try {
        do {
          again = false;
          await drainAll();
        } while (again && !stopped);
      } catch (err) {
        logger.warn({ err: describe(err) }, 'outbox drain failed; will retry');
      } finally {
        draining = null;
      }
    })();
    return draining;
  };
  const onAppended = () => void drain();
  ledgerEvents.on('appended', onAppended);
  const timer = setInterval(() => void drain(), DRAIN_EVERY_MS);
  timer.unref();
  void drain();
  const checkpoints = startCheckpointSchedule({ sequelize: ctx.db.sequelize, config, logger });

  let stopping: Promise<void> | null = null;
  return {
    boss,
    drain,
    stop: () =>
      (stopping ??= (async () => {
        clearInterval(timer);
        ledgerEvents.off('appended', onAppended);
        stopped = true;
        await Promise.all([draining, checkpoints.stop()]);
        // Deliveries under way may finish (a receiver has the timeout to answer); what is still
        // running after that is recovered by the next process (recoverStalled).
        await Promise.all([webhooks.stop(Math.min(v.webhookTimeoutMs, 10_000) + 1_000), emails.stop(5_000)]);
        await boss.stop({ graceful: true, timeout: 5_000, wait: true }).catch((err) => logger.warn({ err: describe(err) }, 'job queue did not stop cleanly'));
        await pool.end().catch(() => {});
      })()),
  };
}
