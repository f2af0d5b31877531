// The stored Merkle tree of each organisation (ledger_tree_nodes): extending it from its built size
// to the chain's head, and reading the few perfect-subtree hashes a root or a proof needs.
//
// The builder runs off the lot path (before a checkpoint is issued): it reads only the new seals and
// the right frontier (≤ log n nodes), never the whole tree, and writes each batch with one INSERT.
// Builders are serialised per organisation by a transaction-scoped advisory lock and re-read the
// built size under it, so two processes building at once append each node exactly once.
import type { Sequelize } from 'sequelize';
import { withConnection, type PgClient, type PgResult } from '../db/raw';
import { leafHash, TreeExtender, type NodeLookup, type NodeRef } from './merkle';

/** Advisory-lock class of tree building, (TREE_LOCK_CLASS, hashtext(organisation id)); the chains use 7820. */
export const TREE_LOCK_CLASS = 7840;
/** Leaves added per transaction (about twice as many rows). */
const BATCH_LEAVES = 8192;

const rowsOf = async <T>(conn: PgClient, text: string, values: unknown[]): Promise<T[]> => ((await conn.query(text, values)) as PgResult).rows as T[];

/** The number of leaves stored for an organisation. */
export async function builtSize(conn: PgClient, organisationId: string): Promise<number> {
  const rows = await rowsOf<{ idx: string }>(
    conn,
    'SELECT idx FROM ledger_tree_nodes WHERE organisation_id = $1 AND level = 0 ORDER BY idx DESC LIMIT 1',
    [organisationId],
  );
  return rows[0] ? Number(rows[0].idx) + 1 : 0;
}

/** The chain's head position (0 when empty); the chain is its verdicts and withdrawals (ledger_entries, 0206). */
export async function chainHead(conn: PgClient, organisationId: string): Promise<number> {
  const rows = await rowsOf<{ head: string | null }>(conn, 'SELECT max(sequence) AS head FROM ledger_entries WHERE organisation_id = $1', [organisationId]);
  return Number(rows[0]?.head ?? 0);
}

/** Reads the named nodes in one query; a missing one is an error when the lookup asks for it. */
export async function readNodes(conn: PgClient, organisationId: string, refs: NodeRef[]): Promise<NodeLookup> {
  const unique = new Map(refs.map((r) => [`${r.level}/${r.index}`, r]));
  const nodes = new Map<string, Buffer>();
  if (unique.size > 0) {
    const list = [...unique.values()];
    const rows = await rowsOf<{ level: number; idx: string; hash: Buffer }>(
      conn,
      `SELECT n.level, n.idx, n.hash FROM unnest($2::smallint[], $3::bigint[]) AS w(level, idx)
       JOIN ledger_tree_nodes n ON n.organisation_id = $1 AND n.level = w.level AND n.idx = w.idx`,
      [organisationId, list.map((r) => r.level), list.map((r) => r.index)],
    );
    for (const r of rows) nodes.set(`${r.level}/${Number(r.idx)}`, r.hash);
  }
  return (level, index) => {
    const h = nodes.get(`${level}/${index}`);
    if (!h) throw new MissingNode(level, index);
    return h;
  };
}

/** The store lacks a node a computation needed (the tree is not built that far, or rows are missing). */
export class MissingNode extends Error {
  constructor(
    readonly level: number,
    readonly index: number,
  ) {
    super(`the ledger tree has no node at level ${level}, index ${index}`);
  }
}

/** The chain is not a run of positions 1..n (a gap where the builder expected a seal). */
export class ChainGap extends Error {}

/**
 * Extends one batch under the organisation's tree lock, in its own transaction; returns the built
 * size after it (equal to the size before when the tree had reached `target`).
 */
async function extendBatch(conn: PgClient, organisationId: string, target: number, batchLeaves: number): Promise<number> {
  await conn.query('BEGIN');
  try {
    await conn.query('SELECT pg_advisory_xact_lock($1, hashtext($2))', [TREE_LOCK_CLASS, organisationId]);
    const from = await builtSize(conn, organisationId);
    const to = Math.min(target, from + batchLeaves);
    if (to <= from) {
      await conn.query('COMMIT');
      return from;
    }
    const seals = await rowsOf<{ sequence: string; seal: string }>(
      conn,
      'SELECT sequence, seal FROM ledger_entries WHERE organisation_id = $1 AND sequence > $2 AND sequence <= $3 ORDER BY sequence',
      [organisationId, from, to],
    );
    const frontier = await readNodes(conn, organisationId, TreeExtender.frontierNodes(from));
    const tree = new TreeExtender(from, frontier);
    const levels: number[] = [];
    const indexes: number[] = [];
    const hashes: string[] = [];
    for (const s of seals) {
      // Leaf i is position i + 1 (FORMAT.md): a missing position would shift every later leaf.
      if (Number(s.sequence) !== tree.size + 1) throw new ChainGap(`position ${tree.size + 1} of the chain is missing`);
      for (const n of tree.push(leafHash(Buffer.from(s.seal, 'hex')))) {
        levels.push(n.level);
        indexes.push(n.index);
        hashes.push(n.hash.toString('hex'));
      }
    }
    if (tree.size !== to) throw new ChainGap(`position ${tree.size + 1} of the chain is missing`);
    await conn.query(
      `INSERT INTO ledger_tree_nodes (organisation_id, level, idx, hash)
       SELECT $1, l, i, decode(h, 'hex') FROM unnest($2::smallint[], $3::bigint[], $4::text[]) AS t(l, i, h)`,
      [organisationId, levels, indexes, hashes],
    );
    await conn.query('COMMIT');
    return to;
  } catch (err) {
    await conn.query('ROLLBACK').catch(() => {});
    throw err;
  }
}

/**
 * Extends the organisation's tree to `target` leaves (default: the chain's head as it is now) and
 * returns the size reached. Idempotent, safe to run from several processes at once.
 */
export async function extendTree(sequelize: Sequelize, organisationId: string, target?: number, batchLeaves = BATCH_LEAVES): Promise<number> {
  return withConnection(sequelize, async (conn) => {
    const goal = target ?? (await chainHead(conn, organisationId));
    let size = await builtSize(conn, organisationId);
    while (size < goal) {
      const next = await extendBatch(conn, organisationId, goal, batchLeaves);
      if (next === size) break;
      size = next;
    }
    return size;
  });
}
