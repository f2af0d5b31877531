// GET /v1/ledger/verify: the check of one range of a chain against the latest checkpoint, instead of
// a walk of everything. The range's records are checked one by one (record-check.ts); their leaf
// hashes, recomputed from the seals, with the stored subtrees outside the range must give the
// checkpoint's root, and the stored subtrees inside the range must equal the recomputed ones; the
// checkpoint's signature and its consistency with the one before are checked too.
import { setImmediate as nextTurn } from 'node:timers/promises';
import type { Sequelize } from 'sequelize';
import type { Config } from '../config';
import { InvalidInput } from '../core/errors';
import { withConnection, type PgResult } from '../db/raw';
import { checkpointSignatureProblem, previousCheckpoint, type Checkpoint } from './checkpoints';
import { consistencyNodes, consistencyProof, leafHash, mixedRoot, mixedRootNodes, subtreesWithin, verifyConsistency } from './merkle';
import { ensureCheckpoint } from './issue';
import { chainPage, RecordChecker, sealAt, type Break } from './record-check';
import { MissingNode, readNodes } from './tree-store';

/** The range checked when none is asked for: the newest this many positions. */
export const DEFAULT_RANGE = 1000;
/** The largest range one request checks; more is a walk's job. */
export const MAX_RANGE = 100_000;
/** Checking done without a break before other requests get a turn (a signature takes 0.05–0.5 ms). */
export const SLICE_MS = 10;
const PAGE = 500;

export interface LedgerCheck {
  intact: boolean;
  verdictsChecked: number;
  from: number | null;
  to: number | null;
  head: { sequence: number; seal: string } | null;
  firstBreak: Break | null;
  checkpoint: Checkpoint | null;
  signatureValid: boolean | null;
  rootMatches: boolean | null;
  consistentWithPrevious: boolean | null;
  previousTreeSize: number | null;
  findings: string[];
}

/** Whether `c` is consistent with `prev`, by a consistency proof from the stored tree (RFC 9162 §2.1.4.2). */
export async function consistentWith(sequelize: Sequelize, prev: Checkpoint, c: Checkpoint): Promise<boolean> {
  try {
    return await withConnection(sequelize, async (conn) => {
      const proof = consistencyProof(prev.treeSize, c.treeSize, await readNodes(conn, c.organisationId, consistencyNodes(prev.treeSize, c.treeSize)));
      return verifyConsistency(prev.treeSize, c.treeSize, Buffer.from(prev.rootHash, 'hex'), Buffer.from(c.rootHash, 'hex'), proof);
    });
  } catch (err) {
    if (err instanceof MissingNode) return false;
    throw err;
  }
}

export async function verifyLedgerRange(
  sequelize: Sequelize,
  config: Pick<Config, 'dataDir' | 'verdicts'>,
  organisationId: string,
  range: { from?: number; to?: number },
): Promise<LedgerCheck> {
  const findings: string[] = [];
  const { checkpoint, problem } = await ensureCheckpoint(sequelize, config, organisationId);
  if (problem) findings.push(problem);
  const result: LedgerCheck = {
    intact: true,
    verdictsChecked: 0,
    from: null,
    to: null,
    head: null,
    firstBreak: null,
    checkpoint,
    signatureValid: null,
    rootMatches: null,
    consistentWithPrevious: null,
    previousTreeSize: null,
    findings,
  };
  if (!checkpoint) {
    if (range.from !== undefined || range.to !== undefined) {
      throw new InvalidInput('your ledger has no checkpoint yet, so there is no range to check', [{ field: range.from !== undefined ? '/from' : '/to', detail: 'the ledger is empty' }]);
    }
    result.intact = findings.length === 0;
    return result;
  }
  const n = checkpoint.treeSize;
  const to = range.to ?? (range.from !== undefined ? Math.min(n, range.from + DEFAULT_RANGE - 1) : n);
  const from = range.from ?? Math.max(1, to - DEFAULT_RANGE + 1);
  if (to > n) throw new InvalidInput(`the latest checkpoint covers positions 1 to ${n}`, [{ field: '/to', detail: `must be at most ${n}` }]);
  if (from > to) throw new InvalidInput('from must not be after to', [{ field: '/from', detail: `must be at most ${to}` }]);
  if (to - from + 1 > MAX_RANGE) {
    throw new InvalidInput(`one check covers at most ${MAX_RANGE} positions; walk the whole chain with POST /v1/ledger/walks`, [
      { field: '/from', detail: `must be at least ${to - MAX_RANGE + 1} for this to` },
    ]);
  }
  result.from = from;
  result.to = to;

  // The records, one by one.
  const checker = new RecordChecker(sequelize, organisationId, from, from > 1 ? await sealAt(sequelize, organisationId, from - 1) : null);
  const leaves: Buffer[] = [];
  let slice = performance.now();
  for (let next = from; next <= to && !result.firstBreak; ) {
    const rows = await chainPage(sequelize, organisationId, next, to, PAGE);
    if (rows.length === 0) {
      result.firstBreak = { sequence: next, verdictId: '', reason: `position ${next} is missing` };
      break;
    }
    for (const r of rows) {
      if (performance.now() - slice >= SLICE_MS) {
        await nextTurn();
        slice = performance.now();
      }
      const brk = await checker.check(r);
      if (brk) {
        result.firstBreak = brk;
        break;
      }
      leaves.push(leafHash(Buffer.from(r.seal, 'hex')));
      result.head = { sequence: Number(r.sequence), seal: r.seal };
      result.verdictsChecked++;
    }
    next = checker.expected;
  }
  if (result.firstBreak) findings.push(`position ${result.firstBreak.sequence}: ${result.firstBreak.reason}`);

  // The tree: the range's recomputed leaves with the stored subtrees outside give the root, and the
  // stored subtrees inside the range are the recomputed ones.
  if (!result.firstBreak) {
    const lo = from - 1;
    const hi = to;
    result.rootMatches = await withConnection(sequelize, async (conn) => {
      let ok = true;
      try {
        const outside = await readNodes(conn, organisationId, mixedRootNodes(n, lo, hi));
        if (!mixedRoot(n, lo, leaves, outside).equals(Buffer.from(checkpoint.rootHash, 'hex'))) {
          findings.push("the range's seals with the stored tree do not give the checkpoint's root");
          ok = false;
        }
      } catch (err) {
        if (!(err instanceof MissingNode)) throw err;
        findings.push(`the stored tree is missing a node (level ${err.level}, index ${err.index})`);
        ok = false;
      }
      const expected = subtreesWithin(lo, leaves);
      const bounds = [...Array(Math.floor(Math.log2(hi - lo)) + 1).keys()].map((k) => ({ level: k, first: Math.ceil(lo / 2 ** k), last: Math.floor(hi / 2 ** k) - 1 }));
      const stored = ((await conn.query(
        `SELECT n.level, n.idx, n.hash FROM unnest($2::smallint[], $3::bigint[], $4::bigint[]) AS w(level, first, last)
         JOIN ledger_tree_nodes n ON n.organisation_id = $1 AND n.level = w.level AND n.idx BETWEEN w.first AND w.last`,
        [organisationId, bounds.map((b) => b.level), bounds.map((b) => b.first), bounds.map((b) => b.last)],
      )) as PgResult).rows as { level: number; idx: string; hash: Buffer }[];
      const seen = new Set<string>();
      for (const s of stored) {
        const key = `${s.level}/${Number(s.idx)}`;
        seen.add(key);
        const want = expected.get(key);
        if (want && !want.equals(s.hash)) {
          if (ok) findings.push(`the stored tree node at level ${s.level}, index ${Number(s.idx)} does not match the seals of its leaves`);
          ok = false;
        }
      }
      const missing = [...expected.keys()].filter((k) => !seen.has(k));
      if (missing.length > 0) {
        findings.push(`the stored tree lacks ${missing.length} node(s) inside the range (first: level/index ${missing[0]})`);
        ok = false;
      }
      return ok;
    });
  }

  const sig = await checkpointSignatureProblem(sequelize, checkpoint);
  result.signatureValid = sig === null;
  if (sig) findings.push(`the checkpoint of tree size ${n}: ${sig}`);
  const prev = await previousCheckpoint(sequelize, organisationId, n);
  if (prev) {
    result.previousTreeSize = prev.treeSize;
    result.consistentWithPrevious = await consistentWith(sequelize, prev, checkpoint);
    if (!result.consistentWithPrevious) findings.push(`the checkpoint of tree size ${n} is not consistent with the one of size ${prev.treeSize}`);
  }
  result.intact = findings.length === 0;
  return result;
}
