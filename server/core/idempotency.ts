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
//
// `idempotent` serialises the first run of a key: concurrent requests with one key wait for one
// another on a transaction-scoped advisory lock on (organisation, operation, key), taken before the
// lookup and held while `create` runs and its reply is stored; the next one then finds that reply
// and replays it. The lock is held on a connection of a small pool of its own (`lockPool`), not on
// one of Sequelize's, and `create` runs its own queries on Sequelize's pool as always. Why: `create`
// belongs to the areas and uses their models without a transaction handle, so it cannot run inside
// the lock's transaction; and waiting for the lock on Sequelize's own connections would let twenty
// waiters hold all twenty while the one holder's `create` waits for a connection (a deadlock until
// the pool's acquire timeout). A waiter holds only a lock-pool connection, and the holder never
// needs a second one of those. Within a process, requests with one key also queue in memory first,
// so one key's burst uses one lock connection. The price: `create` commits before the reply is
// stored, so a crash between the two leaves a creation without its stored reply (as before).
import pg from 'pg';
import { QueryTypes, type Sequelize } from 'sequelize';
import { onDatabaseClose } from '../db/database';
import { preparedRows } from '../db/raw';
import { Refused, Unavailable } from './errors';
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

/** Advisory-lock class of idempotency keys (the ledger's chains use 7820). */
const KEY_LOCK_CLASS = 7821;

const lockPools = new Map<Sequelize, pg.Pool>();

/** The pool the key locks are held on: a few connections to the same database as `sequelize`. */
function lockPool(sequelize: Sequelize): pg.Pool {
  let pool = lockPools.get(sequelize);
  if (!pool) {
    const c = sequelize.config;
    const dialectOptions = (c.dialectOptions ?? {}) as pg.PoolConfig;
    pool = new pg.Pool({
      ...(c.ssl ? { ssl: dialectOptions.ssl ?? true } : {}),
      host: c.host,
      port: c.port ? Number(c.port) : undefined,
      database: c.database,
      user: c.username,
      password: c.password ?? undefined,
      max: 4,
      idleTimeoutMillis: 5_000,
      allowExitOnIdle: true,
      connectionTimeoutMillis: 3_000,
      application_name: 'lotproof-idempotency',
    });
    pool.on('error', () => {
      // an idle connection lost (a database restart): the pool replaces it on next use
    });
    lockPools.set(sequelize, pool);
  }
  return pool;
}

onDatabaseClose(async () => {
  const pools = [...lockPools.values()];
  lockPools.clear();
  await Promise.all(pools.map((p) => p.end().catch(() => {})));
});

const localQueues = new Map<string, Promise<unknown>>();

/** Runs `work` after every earlier `work` of the same name in this process has finished. */
async function oneAtATimeHere<T>(name: string, work: () => Promise<T>): Promise<T> {
  const run = (localQueues.get(name) ?? Promise.resolve()).then(work);
  const tail = run.catch(() => {});
  localQueues.set(name, tail);
  try {
    return await run;
  } finally {
    if (localQueues.get(name) === tail) localQueues.delete(name);
  }
}

/** Runs `work` holding the claim's key lock, in a transaction on a lock-pool connection. */
async function underKeyLock<T>(sequelize: Sequelize, claim: IdempotencyClaim, work: (client: pg.PoolClient) => Promise<T>): Promise<T> {
  let client: pg.PoolClient;
  try {
    client = await lockPool(sequelize).connect();
  } catch {
    throw new Unavailable('The database is not reachable; nothing was stored. Try again shortly.');
  }
  let broken = false;
  try {
    await client.query('BEGIN');
    await client.query("SET LOCAL lock_timeout = '30s'");
    try {
      await client.query('SELECT pg_advisory_xact_lock($1, hashtext($2))', [KEY_LOCK_CLASS, `${claim.organisationId}:${claim.operation}:${claim.key}`]);
    } catch (err) {
      if ((err as { code?: string }).code === '55P03') throw new Unavailable('Another request with this Idempotency-Key is still being handled. Try again shortly.');
      throw err;
    }
    const result = await work(client);
    await client.query('COMMIT');
    return result;
  } catch (err) {
    await client.query('ROLLBACK').catch(() => {
      broken = true;
    });
    throw err;
  } finally {
    client.release(broken);
  }
}

/**
 * Runs `create` once per claim: a claim seen before replays its stored reply (or is refused when
 * the request differs); a new one stores the reply. Concurrent requests with one key wait for the
 * first (see the top of this file). Without a claim, `create` just runs.
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
  const open = (stored: string) => (isSealed(stored) && box ? box.open(stored, context) : stored);
  // A replay (the common retry) needs no lock.
  const known = await findPrior(sequelize, claim);
  if (known) return replayOrRefuse(known, claim, open);
  const name = `${claim.organisationId}:${claim.operation}:${claim.key}`;
  return oneAtATimeHere(name, () =>
    underKeyLock(sequelize, claim, async (client) => {
      const { rows } = await client.query<PriorReply>(
        'SELECT request_hash, status, response FROM idempotency_records WHERE organisation_id = $1 AND operation = $2 AND key = $3',
        [claim.organisationId, claim.operation, claim.key],
      );
      if (rows[0]) return replayOrRefuse(rows[0], claim, open);
      const r = await create();
      const text = JSON.stringify(r.value);
      const columns = STORED_REPLY_COLUMNS.map(([c]) => c).join(', ');
      const values = STORED_REPLY_COLUMNS.map(([, cast], i) => `$${i + 1}${cast}`).join(', ');
      // Committed with the lock's transaction, so the next holder of the lock sees it.
      await client.query(`INSERT INTO idempotency_records (${columns}) VALUES (${values}) ON CONFLICT DO NOTHING`, storedReplyRow(claim, r.status, box ? box.seal(text, context) : text, r.resourceId ?? null));
      return { status: r.status, body: text, replayed: false };
    }),
  );
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
