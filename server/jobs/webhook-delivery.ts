// Delivers one webhook: signs the stored payload per Standard Webhooks (webhook-id is the delivery
// id, so receivers can drop duplicates), POSTs it, logs the attempt. A non-2xx answer or a network
// error throws, and the queue retries with exponential backoff until the retry limit. The target's
// address is checked as it is connected to (webhook-post.ts).
import { Webhook } from 'standardwebhooks';
import { QueryTypes, type Sequelize } from 'sequelize';
import type { Logger } from 'pino';
import type { Config } from '../config';
import { postWebhook, RefusedTarget } from './webhook-post';
import type { SecretBox } from '../core/secret-box';
import { openWebhookSecret } from '../webhooks/endpoints';

export interface JobDeps {
  sequelize: Sequelize;
  config: Config;
  logger: Logger;
  /** Opens the endpoints' sealed signing secrets (made once per job runner). */
  secrets: SecretBox;
}

export class DeliveryFailed extends Error {}

export async function deliverWebhook(deps: JobDeps, deliveryId: string, lastAttempt: boolean): Promise<void> {
  const { sequelize, config } = deps;
  const rows = await sequelize.query<{
    id: string; payload: string; status: string; attempts: number; endpoint_id: string; url: string; secret: string; enabled: boolean; deleted_at: Date | null;
  }>(
    `SELECT d.id, d.payload, d.status, d.attempts, e.id AS endpoint_id, e.url, e.secret, e.enabled, e.deleted_at
     FROM webhook_deliveries d JOIN webhook_endpoints e ON e.id = d.endpoint_id WHERE d.id = $1`,
    { bind: [deliveryId], type: QueryTypes.SELECT },
  );
  const d = rows[0];
  if (!d || d.status !== 'pending') return;
  const attempt = d.attempts + 1;
  const log = async (statusCode: number | null, error: string | null, ms: number, status: 'pending' | 'delivered' | 'failed') => {
    await sequelize.query('INSERT INTO webhook_attempts (delivery_id, attempt, status_code, error, duration_ms) VALUES ($1, $2, $3, $4, $5)', {
      bind: [d.id, attempt, statusCode, error, Math.round(ms)],
    });
    await sequelize.query(
      `UPDATE webhook_deliveries SET attempts = $2, last_status_code = $3, status = $4,
         delivered_at = CASE WHEN $4 = 'delivered' THEN now() ELSE delivered_at END WHERE id = $1`,
      { bind: [d.id, attempt, statusCode, status] },
    );
  };
  if (!d.enabled || d.deleted_at) {
    await log(null, 'the endpoint is disabled or removed', 0, 'failed');
    return;
  }
  let secret: string;
  try {
    secret = openWebhookSecret(deps.secrets, d.endpoint_id, d.secret);
  } catch {
    // Sealed under another key: every server sharing this database needs the same LOTPROOF_SECRETS_KEY.
    const error = 'the signing secret cannot be opened here: this server has another LOTPROOF_SECRETS_KEY than the one that stored it';
    await log(null, error, 0, lastAttempt ? 'failed' : 'pending');
    throw new DeliveryFailed(error);
  }
  const now = new Date();
  const signature = new Webhook(secret).sign(d.id, now, d.payload);
  const started = performance.now();
  let statusCode: number | null = null;
  let error: string | null = null;
  try {
    const res = await postWebhook(
      d.url,
      {
        'content-type': 'application/json',
        'user-agent': 'Lotproof-Webhooks/1',
        'webhook-id': d.id,
        'webhook-timestamp': String(Math.floor(now.getTime() / 1000)),
        'webhook-signature': signature,
      },
      d.payload,
      { timeoutMs: config.verdicts.webhookTimeoutMs, allowPrivate: config.verdicts.webhookAllowPrivateTargets },
    );
    statusCode = res.status;
    if (res.status < 200 || res.status >= 300) error = `the receiver answered HTTP ${res.status}`;
  } catch (err) {
    const e = err as Error;
    error = e.name === 'TimeoutError' ? `no answer within ${config.verdicts.webhookTimeoutMs} ms` : e instanceof RefusedTarget ? `refused: ${e.message}` : `could not connect: ${e.message}`;
  }
  const ms = performance.now() - started;
  if (!error) {
    await log(statusCode, null, ms, 'delivered');
    return;
  }
  await log(statusCode, error, ms, lastAttempt ? 'failed' : 'pending');
  throw new DeliveryFailed(error);
}
