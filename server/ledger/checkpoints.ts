// Signed checkpoints (FORMAT.md, "Checkpoint"): "the tree of this organisation had this size and this
// root at this time", Ed25519-signed over the RFC 8785 canonical JSON of the object without its
// signature. Issued on a schedule (server/jobs/checkpoint-schedule.ts) and on demand, stored
// append-only with increasing tree sizes, read back newest first.
import { sign, verify } from 'node:crypto';
import { QueryTypes, type Sequelize } from 'sequelize';
import type { Config } from '../config';
import { decodeCursor, encodeCursor } from '../core/cursor';
import { InvalidInput, NotFound } from '../core/errors';
import { withConnection, type PgClient, type PgResult } from '../db/raw';
import { canonicalJson } from '../verdicts/canonical';
import { currentSigningKey, publicKeyValidAt, publishSigningKey } from '../verdicts/signing-keys';
import { rootHash, rootNodes } from './merkle';
import { extendTree, readNodes } from './tree-store';

export const CHECKPOINT_FORMAT = 'lotproof.checkpoint/1';
/** Advisory-lock class of issuing an organisation's checkpoints (the tree builder uses 7840). */
const CHECKPOINT_LOCK_CLASS = 7841;

export interface Checkpoint {
  format: typeof CHECKPOINT_FORMAT;
  organisationId: string;
  treeSize: number;
  rootHash: string;
  issuedAt: string;
  kid: string;
  signature: string;
}

/** The signed message: UTF-8 of the canonical JSON of the checkpoint without `signature`. */
export function checkpointMessage(c: Omit<Checkpoint, 'signature'>): Buffer {
  const { format, issuedAt, kid, organisationId, rootHash, treeSize } = c;
  return Buffer.from(canonicalJson({ format, issuedAt, kid, organisationId, rootHash, treeSize }), 'utf8');
}

/**
 * Why a checkpoint's signature does not verify, or null when it does. The one place a checkpoint's
 * key is looked up: the key named by kid must have been valid at its issuedAt (FORMAT.md, "Signing
 * keys"), through the window-aware lookup of signing-keys.ts.
 */
export async function checkpointSignatureProblem(sequelize: Sequelize, c: Checkpoint): Promise<string | null> {
  const found = await publicKeyValidAt(sequelize, c.kid, new Date(c.issuedAt));
  if ('reason' in found) return found.message;
  const sig = /^[A-Za-z0-9_-]+$/.test(c.signature) ? Buffer.from(c.signature, 'base64url') : null;
  if (!sig || sig.toString('base64url') !== c.signature) return 'the signature is not base64url';
  try {
    if (verify(null, checkpointMessage(c), found.key, sig)) return null;
  } catch {
    /* a malformed signature does not verify */
  }
  return 'the signature does not verify for this checkpoint and key';
}

interface CheckpointRow {
  organisation_id: string;
  tree_size: string | number;
  root_hash: string;
  issued_at: Date | string;
  kid: string;
  signature: string;
}

const COLUMNS = 'organisation_id, tree_size, root_hash, issued_at, kid, signature';

export function checkpointOf(r: CheckpointRow): Checkpoint {
  return {
    format: CHECKPOINT_FORMAT,
    organisationId: r.organisation_id,
    treeSize: Number(r.tree_size),
    rootHash: r.root_hash,
    issuedAt: (r.issued_at instanceof Date ? r.issued_at : new Date(r.issued_at)).toISOString(),
    kid: r.kid,
    signature: r.signature,
  };
}

/** Runs in the transaction that inserts a new checkpoint (e.g. writing witness notifications to an outbox). */
export type CheckpointHook = (client: PgClient, checkpoint: Checkpoint) => Promise<void>;
const hooks: CheckpointHook[] = [];

/** Registers a hook run for every checkpoint issued in this process, in the checkpoint's own transaction. */
export function onCheckpointIssued(hook: CheckpointHook): () => void {
  hooks.push(hook);
  return () => {
    const i = hooks.indexOf(hook);
    if (i >= 0) hooks.splice(i, 1);
  };
}

const rowsOf = async <T>(conn: PgClient, text: string, values: unknown[]): Promise<T[]> => ((await conn.query(text, values)) as PgResult).rows as T[];

export interface Issued {
  checkpoint: Checkpoint;
  /** false: nothing was appended since the latest checkpoint, which is returned instead. */
  created: boolean;
}

/**
 * Brings the organisation's tree up to its chain's head and, when the head has moved past the
 * latest checkpoint, signs and stores a new one (with `inTransaction` and the registered hooks in
 * the same transaction). Returns null for an empty ledger (a checkpoint has treeSize ≥ 1).
 */
export async function issueCheckpoint(
  sequelize: Sequelize,
  config: Pick<Config, 'dataDir' | 'verdicts'>,
  organisationId: string,
  options: { inTransaction?: CheckpointHook } = {},
): Promise<Issued | null> {
  const size = await extendTree(sequelize, organisationId);
  const key = currentSigningKey(config);
  await publishSigningKey(sequelize, key);
  return withConnection(sequelize, async (conn) => {
    await conn.query('BEGIN');
    try {
      await conn.query('SELECT pg_advisory_xact_lock($1, hashtext($2))', [CHECKPOINT_LOCK_CLASS, organisationId]);
      const [latest] = await rowsOf<CheckpointRow>(
        conn,
        `SELECT ${COLUMNS} FROM ledger_checkpoints WHERE organisation_id = $1 ORDER BY tree_size DESC LIMIT 1`,
        [organisationId],
      );
      if (size === 0 || (latest && Number(latest.tree_size) >= size)) {
        await conn.query('COMMIT');
        return latest ? { checkpoint: checkpointOf(latest), created: false } : null;
      }
      const root = rootHash(size, await readNodes(conn, organisationId, rootNodes(size)));
      const unsigned = {
        format: CHECKPOINT_FORMAT,
        organisationId,
        treeSize: size,
        rootHash: root.toString('hex'),
        issuedAt: new Date().toISOString(),
        kid: key.kid,
      } as const;
      const checkpoint: Checkpoint = { ...unsigned, signature: sign(null, checkpointMessage(unsigned), key.privateKey).toString('base64url') };
      await conn.query(
        'INSERT INTO ledger_checkpoints (organisation_id, tree_size, root_hash, issued_at, kid, signature) VALUES ($1, $2, $3, $4, $5, $6)',
        [organisationId, size, checkpoint.rootHash, checkpoint.issuedAt, checkpoint.kid, checkpoint.signature],
      );
      if (options.inTransaction) await options.inTransaction(conn, checkpoint);
      for (const hook of [...hooks]) await hook(conn, checkpoint);
      await conn.query('COMMIT');
      return { checkpoint, created: true };
    } catch (err) {
      await conn.query('ROLLBACK').catch(() => {});
      throw err;
    }
  });
}

/** Organisations whose chain head has moved past their latest checkpoint (for the schedule). */
export async function organisationsBehind(sequelize: Sequelize): Promise<string[]> {
  const rows = await sequelize.query<{ organisation_id: string }>(
    `SELECT o.id AS organisation_id FROM organisations o
     CROSS JOIN LATERAL (SELECT max(sequence) AS head FROM ledger_entries v WHERE v.organisation_id = o.id) h
     LEFT JOIN LATERAL (SELECT max(tree_size) AS size FROM ledger_checkpoints c WHERE c.organisation_id = o.id) c ON true
     WHERE h.head IS NOT NULL AND h.head > coalesce(c.size, 0)`,
    { type: QueryTypes.SELECT },
  );
  return rows.map((r) => r.organisation_id);
}

export async function latestCheckpoint(sequelize: Sequelize, organisationId: string): Promise<Checkpoint | null> {
  const rows = await sequelize.query<CheckpointRow>(
    `SELECT ${COLUMNS} FROM ledger_checkpoints WHERE organisation_id = $1 ORDER BY tree_size DESC LIMIT 1`,
    { bind: [organisationId], type: QueryTypes.SELECT },
  );
  return rows[0] ? checkpointOf(rows[0]) : null;
}

/** The latest checkpoint, or a 404 naming none (the ledger is empty or not yet checkpointed). */
export async function requireLatestCheckpoint(sequelize: Sequelize, organisationId: string): Promise<Checkpoint> {
  const c = await latestCheckpoint(sequelize, organisationId);
  if (!c) throw new NotFound('your organisation has no checkpoint yet: its ledger is empty or none was issued (POST /v1/ledger/checkpoints)');
  return c;
}

/** The checkpoint of one tree size; 404 naming `field` when there is none. */
export async function checkpointAt(sequelize: Sequelize, organisationId: string, treeSize: number, field: string): Promise<Checkpoint> {
  if (!Number.isSafeInteger(treeSize) || treeSize < 1) throw new InvalidInput('a tree size is a whole number from 1', [{ field, detail: 'must be an integer from 1' }]);
  const rows = await sequelize.query<CheckpointRow>(`SELECT ${COLUMNS} FROM ledger_checkpoints WHERE organisation_id = $1 AND tree_size = $2`, {
    bind: [organisationId, treeSize],
    type: QueryTypes.SELECT,
  });
  if (!rows[0]) throw notFoundAt(`your organisation has no checkpoint of tree size ${treeSize}`, field);
  return checkpointOf(rows[0]);
}

/** The checkpoint just before `treeSize` (for consistency with the previous one), or null. */
export async function previousCheckpoint(sequelize: Sequelize, organisationId: string, treeSize: number): Promise<Checkpoint | null> {
  const rows = await sequelize.query<CheckpointRow>(
    `SELECT ${COLUMNS} FROM ledger_checkpoints WHERE organisation_id = $1 AND tree_size < $2 ORDER BY tree_size DESC LIMIT 1`,
    { bind: [organisationId, treeSize], type: QueryTypes.SELECT },
  );
  return rows[0] ? checkpointOf(rows[0]) : null;
}

/** Every checkpoint of an organisation up to a size, oldest first (for the walk). */
export async function checkpointsUpTo(sequelize: Sequelize, organisationId: string, treeSize: number): Promise<Checkpoint[]> {
  const rows = await sequelize.query<CheckpointRow>(
    `SELECT ${COLUMNS} FROM ledger_checkpoints WHERE organisation_id = $1 AND tree_size <= $2 ORDER BY tree_size`,
    { bind: [organisationId, treeSize], type: QueryTypes.SELECT },
  );
  return rows.map(checkpointOf);
}

/** Newest first, keyset-paged by tree size. */
export async function listCheckpoints(
  sequelize: Sequelize,
  organisationId: string,
  page: { limit: number; cursor?: string },
): Promise<{ items: Checkpoint[]; nextCursor: string | null }> {
  let below = Number.MAX_SAFE_INTEGER;
  if (page.cursor) {
    const [size] = decodeCursor(page.cursor, 1);
    if (typeof size !== 'number' || !Number.isSafeInteger(size)) throw new InvalidInput('the cursor is not one this API returned', [{ field: '/cursor', detail: 'not a valid cursor' }]);
    below = size;
  }
  const rows = await sequelize.query<CheckpointRow>(
    `SELECT ${COLUMNS} FROM ledger_checkpoints WHERE organisation_id = $1 AND tree_size < $2 ORDER BY tree_size DESC LIMIT $3`,
    { bind: [organisationId, below, page.limit + 1], type: QueryTypes.SELECT },
  );
  const items = rows.slice(0, page.limit).map(checkpointOf);
  return { items, nextCursor: rows.length > page.limit ? encodeCursor([items[items.length - 1]!.treeSize]) : null };
}

/** A 404 that names the request field it is about. */
export function notFoundAt(message: string, field: string): NotFound {
  const e = new NotFound(message);
  e.fields.push({ field, detail: message });
  return e;
}
