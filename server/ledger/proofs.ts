// Inclusion proofs of a verdict's seal in a checkpoint and consistency proofs between two
// checkpoints (FORMAT.md, "Proofs"; RFC 9162 §2.1.3, §2.1.4), computed from the O(log n) stored
// subtree hashes they need, read in one query.
import { QueryTypes, type Sequelize } from 'sequelize';
import type { Config } from '../config';
import { InvalidInput } from '../core/errors';
import { withConnection } from '../db/raw';
import { checkpointAt, latestCheckpoint, notFoundAt, type Checkpoint } from './checkpoints';
import { issueOnDemand } from './issue';
import { consistencyNodes, consistencyProof, inclusionNodes, inclusionProof } from './merkle';
import { readNodes } from './tree-store';

export interface InclusionProof {
  leafIndex: number;
  treeSize: number;
  hashes: string[];
}
export interface ConsistencyProof {
  fromSize: number;
  toSize: number;
  hashes: string[];
}

const hex = (bs: Buffer[]) => bs.map((b) => b.toString('hex'));

/** Inclusion proofs of several leaves in one tree, with one read of the nodes they need together. */
export async function inclusionProofs(sequelize: Sequelize, organisationId: string, leafIndexes: number[], treeSize: number): Promise<InclusionProof[]> {
  if (leafIndexes.length === 0) return [];
  return withConnection(sequelize, async (conn) => {
    const lookup = await readNodes(conn, organisationId, leafIndexes.flatMap((m) => inclusionNodes(m, treeSize)));
    return leafIndexes.map((m) => ({ leafIndex: m, treeSize, hashes: hex(inclusionProof(m, treeSize, lookup)) }));
  });
}

/**
 * The checkpoint a reader gets by default: the latest, or a new one when the latest does not cover
 * position `atLeast` yet (verdicts are appended faster than the schedule issues checkpoints).
 */
export async function coveringCheckpoint(
  sequelize: Sequelize,
  config: Pick<Config, 'dataDir' | 'verdicts'>,
  organisationId: string,
  atLeast: number,
): Promise<Checkpoint | null> {
  const latest = await latestCheckpoint(sequelize, organisationId);
  if (latest && latest.treeSize >= atLeast) return latest;
  return (await issueOnDemand(sequelize, config, organisationId))?.checkpoint ?? null;
}

export interface InclusionQuery {
  seal?: string;
  verdictId?: string;
  treeSize?: number;
}

export async function proveInclusion(
  sequelize: Sequelize,
  config: Pick<Config, 'dataDir' | 'verdicts'>,
  organisationId: string,
  q: InclusionQuery,
): Promise<{ checkpoint: Checkpoint; verdict: { id: string; sequence: number; seal: string }; proof: InclusionProof }> {
  if ((q.seal === undefined) === (q.verdictId === undefined)) {
    throw new InvalidInput('name the verdict by exactly one of seal and verdictId', [{ field: q.seal === undefined ? '/seal' : '/verdictId', detail: 'give exactly one of seal and verdictId' }]);
  }
  const [row] = await sequelize.query<{ id: string; sequence: string; seal: string }>(
    `SELECT id, sequence, seal FROM ledger_entries WHERE organisation_id = $1 AND ${q.seal !== undefined ? 'seal = $2' : 'id = $2'}`,
    { bind: [organisationId, q.seal !== undefined ? q.seal.toLowerCase() : q.verdictId], type: QueryTypes.SELECT },
  );
  if (!row) {
    throw q.seal !== undefined
      ? notFoundAt(`no verdict with seal ${q.seal} in your organisation`, '/seal')
      : notFoundAt(`no verdict ${q.verdictId} in your organisation`, '/verdictId');
  }
  const sequence = Number(row.sequence);
  let checkpoint: Checkpoint | null;
  if (q.treeSize !== undefined) {
    checkpoint = await checkpointAt(sequelize, organisationId, q.treeSize, '/treeSize');
    if (sequence > checkpoint.treeSize) {
      throw new InvalidInput(`the verdict at position ${sequence} is not in the tree of size ${checkpoint.treeSize}`, [
        { field: '/treeSize', detail: `must be at least ${sequence}, the verdict's position` },
      ]);
    }
  } else {
    checkpoint = await coveringCheckpoint(sequelize, config, organisationId, sequence);
  }
  // A verdict exists, so a checkpoint covering it was found or issued.
  const [proof] = await inclusionProofs(sequelize, organisationId, [sequence - 1], checkpoint!.treeSize);
  return { checkpoint: checkpoint!, verdict: { id: row.id, sequence, seal: row.seal }, proof: proof! };
}

export async function proveConsistency(
  sequelize: Sequelize,
  organisationId: string,
  q: { fromSize: number; toSize?: number },
): Promise<{ from: Checkpoint; to: Checkpoint; proof: ConsistencyProof }> {
  if (q.toSize !== undefined && q.fromSize > q.toSize) {
    throw new InvalidInput('fromSize must not be larger than toSize', [{ field: '/fromSize', detail: `must be at most toSize (${q.toSize})` }]);
  }
  const from = await checkpointAt(sequelize, organisationId, q.fromSize, '/fromSize');
  const to = q.toSize !== undefined ? await checkpointAt(sequelize, organisationId, q.toSize, '/toSize') : (await latestCheckpoint(sequelize, organisationId))!;
  const hashes = await withConnection(sequelize, async (conn) =>
    hex(consistencyProof(from.treeSize, to.treeSize, await readNodes(conn, organisationId, consistencyNodes(from.treeSize, to.treeSize)))),
  );
  return { from, to, proof: { fromSize: from.treeSize, toSize: to.treeSize, hashes } };
}
