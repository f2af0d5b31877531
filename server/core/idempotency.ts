// Idempotency-Key, the one mechanism for every POST that creates something: the first reply to a
// key is stored (table idempotency_records) and replayed byte for byte; the same key with another
// request is refused with one failure, `keyReused`. A request's fingerprint is SHA-256 of its bytes
// as sent (http/replies.ts `requestFingerprint`), so a claim carries only that hash.
//
// Most operations go through `idempotent` below. A lot is sealed by the ledger's group commit, so
// its claim is checked twice with this module's pieces: `findPrior` before the work (a replay
// costs no judging), and `PRIOR_REPLIES_UNDER_LOCK` + `replayOrRefuse` inside the ledger
// transaction, under the chain lock (two concurrent requests with one key give one verdict), whose
// insert writes `storedReplyRow` into `STORED_REPLY_COLUMNS`.
import { QueryTypes, type Sequelize } from 'sequelize';
import { preparedRows } from '../db/raw';
import { Refused } from './errors';
import { isSealed, type SecretBox } from './secret-box';

/** What a request with an Idempotency-Key claims: this key, for this operation, is this request. */
export interface IdempotencyClaim {
  organisationId: string;
  operation: string;
  key: string;
  /** SHA-256 (hex) of the request as sent. */
  requestHash: string;
}

/** A reply as stored for a key. */
export interface PriorReply {
  request_hash: string;
  status: number;
  response: string;
}

export interface StoredReply {
  status: number;
  body: string;
  replayed: boolean;
}

/** The key was used before with another request. */
export function keyReused(): Refused {
  return new Refused(
    'idempotency-key-reused',
    'This Idempotency-Key was already used with a different request body. Use a new key for a new request.',
  );
}

/** Where a sealed stored reply is bound (its associated data). */
export function idempotentReplyContext(organisationId: string, operation: string, key: string): string {
  return `idempotent-reply:${organisationId}:${operation}:${key}`;
}

/** The stored reply for the claim's key, or null when the key is new. */
export async function findPrior(sequelize: Sequelize, claim: IdempotencyClaim): Promise<PriorReply | null> {
  const rows = await preparedRows<PriorReply>(
    sequelize,
    'lotproof-idempotency-prior',
    'SELECT request_hash, status, response FROM idempotency_records WHERE organisation_id = $1 AND operation = $2 AND key = $3',
    [claim.organisationId, claim.operation, claim.key],
  );
  return rows[0] ?? null;
}

/** The replay of a prior reply for this claim; throws `keyReused` when the request differs. */
export function replayOrRefuse(prior: PriorReply, claim: Pick<IdempotencyClaim, 'requestHash'>, open: (stored: string) => string = (s) => s): StoredReply {
  if (prior.request_hash !== claim.requestHash) throw keyReused();
  return { status: prior.status, body: open(prior.response), replayed: true };
}

/** Columns of a stored reply, in the order `storedReplyRow` gives them, with their casts. */
export const STORED_REPLY_COLUMNS: readonly (readonly [string, string])[] = [
  ['organisation_id', '::uuid'],
  ['operation', ''],
  ['key', ''],
  ['request_hash', ''],
  ['status', '::integer'],
  ['response', ''],
  ['resource_id', '::uuid'],
];

export function storedReplyRow(claim: IdempotencyClaim, status: number, response: string, resourceId: string | null): unknown[] {
  return [claim.organisationId, claim.operation, claim.key, claim.requestHash, status, response, resourceId];
}

/**
 * SQL (one scalar subquery, JSON) of the stored replies for a set of claims of one operation, for
 * a read inside another transaction. `claimsJson` is a literal of [[organisationId, key], …] and
 * `operation` a literal, both escaped by the caller's connection.
 */
export function priorRepliesUnderLock(claimsJson: string, operation: string): string {
  return `(SELECT coalesce(json_agg(json_build_object('organisation_id', r.organisation_id, 'key', r.key, 'request_hash', r.request_hash,
                                                      'status', r.status, 'response', r.response)), '[]')
             FROM idempotency_records r
             WHERE r.operation = ${operation}
               AND (r.organisation_id, r.key) IN (SELECT (e->>0)::uuid, e->>1 FROM json_array_elements(${claimsJson}::json) e))`;
}

/**
 * Runs `create` once per claim: a claim seen before replays its stored reply (or is refused when
 * the request differs); a new one stores the reply. Without a claim, `create` just runs.
 */
export async function idempotent(
  sequelize: Sequelize,
  claim: IdempotencyClaim | null,
  create: () => Promise<{ status: number; value: unknown; resourceId?: string }>,
  /** For a reply that carries a secret: it is stored sealed in this box, not in clear. */
  box?: SecretBox,
): Promise<StoredReply> {
  if (!claim) {
    const r = await create();
    return { status: r.status, body: JSON.stringify(r.value), replayed: false };
  }
  const context = idempotentReplyContext(claim.organisationId, claim.operation, claim.key);
  const prior = await findPrior(sequelize, claim);
  if (prior) return replayOrRefuse(prior, claim, (stored) => (isSealed(stored) && box ? box.open(stored, context) : stored));
  const r = await create();
  const text = JSON.stringify(r.value);
  const columns = STORED_REPLY_COLUMNS.map(([c]) => c).join(', ');
  const values = STORED_REPLY_COLUMNS.map((_, i) => `$${i + 1}`).join(', ');
  await sequelize.query(`INSERT INTO idempotency_records (${columns}) VALUES (${values}) ON CONFLICT DO NOTHING`, {
    bind: storedReplyRow(claim, r.status, box ? box.seal(text, context) : text, r.resourceId ?? null),
  });
  return { status: r.status, body: text, replayed: false };
}

/**
 * Calls `visit` with every stored reply of an operation (as stored, and its sealing context); a
 * reply `visit` rewrites is written back only if it is still the one read. For sealing stored
 * replies again under a new key.
 */
export async function forEachStoredReply(
  sequelize: Sequelize,
  operation: string,
  visit: (stored: string, context: string, write: (next: string) => Promise<unknown>) => Promise<void>,
): Promise<void> {
  const replies = await sequelize.query<{ organisation_id: string; key: string; response: string }>(
    'SELECT organisation_id, key, response FROM idempotency_records WHERE operation = $1',
    { bind: [operation], type: QueryTypes.SELECT },
  );
  for (const r of replies) {
    await visit(r.response, idempotentReplyContext(r.organisation_id, operation, r.key), (next) =>
      sequelize.query('UPDATE idempotency_records SET response = $4 WHERE organisation_id = $1 AND operation = $2 AND key = $3 AND response = $5', {
        bind: [r.organisation_id, operation, r.key, next, r.response],
      }));
  }
}
