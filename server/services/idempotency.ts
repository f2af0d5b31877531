// Idempotency-Key for POSTs that create something other than a lot (lots are keyed inside the
// ledger transaction): the first reply is stored and replayed byte for byte; the same key with
// another body is a 422.
import { createHash } from 'node:crypto';
import { QueryTypes, type Sequelize } from 'sequelize';
import { UnprocessableProblem } from '../http/problem';
import { isSealed, type SecretBox } from './secret-box';

/** Where a sealed stored reply is bound (its associated data). */
export function idempotentReplyContext(organisationId: string, operation: string, key: string): string {
  return `idempotent-reply:${organisationId}:${operation}:${key}`;
}

export interface StoredReply {
  status: number;
  body: string;
  replayed: boolean;
}

export async function idempotent(
  sequelize: Sequelize,
  organisationId: string,
  operation: string,
  key: string | null,
  body: unknown,
  create: () => Promise<{ status: number; value: unknown; resourceId?: string }>,
  /** For a reply that carries a secret: it is stored sealed in this box, not in clear. */
  box?: SecretBox,
): Promise<StoredReply> {
  const context = idempotentReplyContext(organisationId, operation, key ?? '');
  if (!key) {
    const r = await create();
    return { status: r.status, body: JSON.stringify(r.value), replayed: false };
  }
  const hash = createHash('sha256').update(JSON.stringify(body ?? null)).digest('hex');
  const find = async () =>
    (
      await sequelize.query<{ request_hash: string; status: number; response: string }>(
        'SELECT request_hash, status, response FROM idempotency_records WHERE organisation_id = $1 AND operation = $2 AND key = $3',
        { bind: [organisationId, operation, key], type: QueryTypes.SELECT },
      )
    )[0];
  const prior = await find();
  if (prior) {
    if (prior.request_hash !== hash) {
      throw new UnprocessableProblem('This Idempotency-Key was already used with a different request body.', 'idempotency-key-reused');
    }
    return { status: prior.status, body: isSealed(prior.response) && box ? box.open(prior.response, context) : prior.response, replayed: true };
  }
  const r = await create();
  const text = JSON.stringify(r.value);
  await sequelize.query(
    `INSERT INTO idempotency_records (organisation_id, operation, key, request_hash, status, response, resource_id)
     VALUES ($1, $2, $3, $4, $5, $6, $7) ON CONFLICT DO NOTHING`,
    { bind: [organisationId, operation, key, hash, r.status, box ? box.seal(text, context) : text, r.resourceId ?? null] },
  );
  return { status: r.status, body: text, replayed: false };
}
