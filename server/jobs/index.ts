// The job side of a Lotproof process: a pg-boss queue in PostgreSQL, the drain that moves outbox
// rows (written in each verdict's own transaction) into the queue, and the workers that deliver
// webhooks and alert e-mails with retries and backoff. Every process may run it; the drain uses
// FOR UPDATE SKIP LOCKED and inserts the jobs in the same transaction that marks rows enqueued, so
// each delivery is queued exactly once even with many processes.
import PgBoss from 'pg-boss';
import pg from 'pg';
import type { AppContext } from '../http/context';
import { ledgerEvents } from '../verdicts/ledger';
import { deliverAlertEmail } from './alert-email';
import { deliverWebhook } from './webhook-delivery';
import { secretBox } from '../core/secret-box';

export const WEBHOOK_QUEUE = 'webhook-delivery';
export const EMAIL_QUEUE = 'alert-email';
const WEBHOOK_WORKERS = 8;

export interface RunningJobs {
  boss: PgBoss;
  /** Moves every waiting outbox row into the queue now (also runs on a timer and after each append). */
  drain: () => Promise<void>;
  stop: () => Promise<void>;
}

export async function startJobs(ctx: AppContext): Promise<RunningJobs> {
  const url = ctx.config.databaseUrl!;
  const v = ctx.config.verdicts;
  const boss = new PgBoss({ connectionString: url, schema: 'pgboss', max: 4, application_name: 'lotproof-jobs' });
  boss.on('error', (err) => ctx.logger.warn({ err: { message: err.message } }, 'job queue error'));
  await boss.start();
  const retry = { retryLimit: v.webhookRetryLimit, retryDelay: v.webhookRetryDelaySeconds, retryBackoff: true };
  await boss.createQueue(WEBHOOK_QUEUE, { name: WEBHOOK_QUEUE, ...retry });
  await boss.createQueue(EMAIL_QUEUE, { name: EMAIL_QUEUE, ...retry });
  const pool = new pg.Pool({ connectionString: url, max: 2, application_name: 'lotproof-drain' });
  pool.on('error', () => {});

  let draining: Promise<void> | null = null;
  let again = false;
  const drainOnce = async (): Promise<number> => {
    const client = await pool.connect();
    try {
      await client.query('BEGIN');
      const db = { executeSql: (text: string, values: unknown[]) => client.query(text, values) };
      const hooks = await client.query<{ id: string }>(
        'SELECT id FROM webhook_deliveries WHERE enqueued_at IS NULL ORDER BY created_at LIMIT 500 FOR UPDATE SKIP LOCKED',
      );
      const mails = await client.query<{ id: string }>(
        'SELECT id FROM alert_emails WHERE enqueued_at IS NULL ORDER BY created_at LIMIT 500 FOR UPDATE SKIP LOCKED',
      );
      const jobs = [
        ...hooks.rows.map((r) => ({ name: WEBHOOK_QUEUE, data: { deliveryId: r.id }, ...retry })),
        ...mails.rows.map((r) => ({ name: EMAIL_QUEUE, data: { emailId: r.id }, ...retry })),
      ];
      if (jobs.length > 0) {
        await boss.insert(jobs, { db });
        if (hooks.rows.length) await client.query('UPDATE webhook_deliveries SET enqueued_at = now() WHERE id = ANY($1::uuid[])', [hooks.rows.map((r) => r.id)]);
        if (mails.rows.length) await client.query('UPDATE alert_emails SET enqueued_at = now() WHERE id = ANY($1::uuid[])', [mails.rows.map((r) => r.id)]);
      }
      await client.query('COMMIT');
      return jobs.length;
    } catch (err) {
      await client.query('ROLLBACK').catch(() => {});
      throw err;
    } finally {
      client.release();
    }
  };
  const drain = (): Promise<void> => {
    if (draining) {
      again = true;
      return draining;
    }
    draining = (async () => {
      try {
        do {
          again = false;
          while ((await drainOnce()) >= 500) {
            /* keep going while full pages come back */
          }
        } while (again);
      } catch (err) {
        ctx.logger.warn({ err: { message: (err as Error).message } }, 'outbox drain failed; will retry');
      } finally {
        draining = null;
      }
    })();
    return draining;
  };
  const onAppended = () => void drain();
  ledgerEvents.on('appended', onAppended);
  const timer = setInterval(() => void drain(), 2_000);
  timer.unref();

  const deps = { sequelize: ctx.db.sequelize, config: ctx.config, logger: ctx.logger, secrets: secretBox(ctx.config) };
  for (let i = 0; i < WEBHOOK_WORKERS; i++) {
    await boss.work<{ deliveryId: string }>(WEBHOOK_QUEUE, { batchSize: 1, pollingIntervalSeconds: 0.5, includeMetadata: true }, async ([job]) => {
      if (job) await deliverWebhook(deps, job.data.deliveryId, job.retryCount >= job.retryLimit);
    });
  }
  await boss.work<{ emailId: string }>(EMAIL_QUEUE, { batchSize: 1, pollingIntervalSeconds: 1 }, async ([job]) => {
    if (job) await deliverAlertEmail(deps, job.data.emailId);
  });
  void drain();

  let stopping: Promise<void> | null = null;
  return {
    boss,
    drain,
    stop: () =>
      (stopping ??= (async () => {
        clearInterval(timer);
        ledgerEvents.off('appended', onAppended);
        await draining;
        await boss.stop({ graceful: true, timeout: 5_000, wait: true }).catch(() => {});
        await pool.end().catch(() => {});
      })()),
  };
}
