// Walks of a whole chain as background jobs (POST /v1/ledger/walks): every record from position 1 to
// the latest checkpoint is checked (record-check.ts), the tree is rebuilt from the seals leaf by leaf
// and its root compared with every checkpoint on the way, whose signatures are checked too.
// Progress is written to ledger_walks as it goes, with a heartbeat: a walk whose process died
// stops beating and reads as interrupted. Nothing survives a restart; start another walk.
import { randomUUID } from 'node:crypto';
import { setImmediate as nextTurn } from 'node:timers/promises';
import { QueryTypes, type Sequelize } from 'sequelize';
import type { Logger } from 'pino';
import type { Config } from '../config';
import { NotFound } from '../core/errors';
import { checkpointSignatureProblem, checkpointsUpTo } from './checkpoints';
import { ensureCheckpoint } from './issue';
import { SLICE_MS } from './ledger-check';
import { leafHash, TreeExtender } from './merkle';
import { chainPage, RecordChecker, type Break } from './record-check';

/** Progress is written at least this often; a running walk silent for STALE_SECONDS has died. */
const HEARTBEAT_MS = 2_000;
const STALE_SECONDS = 30;
const PAGE = 1000;

export interface LedgerWalk {
  id: string;
  status: 'running' | 'finished' | 'interrupted';
  treeSize: number;
  checked: number;
  total: number;
  intact: boolean | null;
  firstBreak: Break | null;
  findings: string[];
  startedAt: string;
  finishedAt: string | null;
}

interface WalkRow {
  id: string;
  status: LedgerWalk['status'];
  tree_size: string;
  checked: string;
  total: string;
  intact: boolean | null;
  first_break: Break | null;
  findings: string[];
  started_at: Date;
  finished_at: Date | null;
}

const viewOf = (r: WalkRow): LedgerWalk => ({
  id: r.id,
  status: r.status,
  treeSize: Number(r.tree_size),
  checked: Number(r.checked),
  total: Number(r.total),
  intact: r.intact,
  firstBreak: r.first_break,
  findings: r.findings,
  startedAt: new Date(r.started_at).toISOString(),
  finishedAt: r.finished_at ? new Date(r.finished_at).toISOString() : null,
});

/** Walks running in this process (so a test or a shutdown can wait for them). */
const running = new Map<string, Promise<void>>();

export async function getWalk(sequelize: Sequelize, organisationId: string, id: string): Promise<LedgerWalk> {
  const rows = await sequelize.query<WalkRow>(
    `SELECT id, CASE WHEN status = 'running' AND heartbeat_at < now() - make_interval(secs => $3) THEN 'interrupted' ELSE status END AS status,
            tree_size, checked, total, intact, first_break, findings, started_at, finished_at
     FROM ledger_walks WHERE organisation_id = $1 AND id = $2`,
    { bind: [organisationId, id, STALE_SECONDS], type: QueryTypes.SELECT },
  );
  if (!rows[0]) throw new NotFound(`no ledger walk ${id} in your organisation`);
  return viewOf(rows[0]);
}

/** Starts a walk and returns at once; the walk runs on in this process. */
export async function startWalk(
  sequelize: Sequelize,
  config: Pick<Config, 'dataDir' | 'verdicts'>,
  logger: Pick<Logger, 'warn'>,
  organisationId: string,
): Promise<LedgerWalk> {
  const { checkpoint, problem } = await ensureCheckpoint(sequelize, config, organisationId);
  const id = randomUUID();
  const size = checkpoint?.treeSize ?? 0;
  await sequelize.query(
    `INSERT INTO ledger_walks (id, organisation_id, status, tree_size, total, findings) VALUES ($1, $2, 'running', $3, $3, $4)`,
    { bind: [id, organisationId, size, JSON.stringify(problem ? [problem] : [])] },
  );
  const work = runWalk(sequelize, organisationId, id, size, problem ? [problem] : [])
    .catch(async (err) => {
      logger.warn({ err: { message: String((err as Error)?.message ?? err).slice(0, 300) }, walk: id }, 'ledger walk stopped');
      // The database may be gone as well: then the heartbeat stops and the walk reads as interrupted.
      await sequelize
        .query(`UPDATE ledger_walks SET status = 'interrupted', heartbeat_at = now(), finished_at = now() WHERE id = $1 AND status = 'running'`, { bind: [id] })
        .catch(() => {});
    })
    .finally(() => running.delete(id));
  running.set(id, work);
  return getWalk(sequelize, organisationId, id);
}

/** Resolves when the walk (if it runs in this process) has ended. */
export async function walkEnded(id: string): Promise<void> {
  await running.get(id);
}

async function runWalk(sequelize: Sequelize, organisationId: string, id: string, size: number, findings: string[]): Promise<void> {
  const checker = new RecordChecker(sequelize, organisationId, 1, null);
  const tree = new TreeExtender(0, () => Buffer.alloc(0));
  const checkpoints = await checkpointsUpTo(sequelize, organisationId, size);
  let nextCheckpoint = 0;
  let firstBreak: Break | null = null;
  let checked = 0;
  let beat = performance.now();
  let slice = performance.now();
  const progress = () =>
    sequelize.query('UPDATE ledger_walks SET checked = $2, heartbeat_at = now() WHERE id = $1', { bind: [id, checked] });

  // The next page is read while this one is checked: PostgreSQL hashes and parses it on one core
  // while Node verifies signatures on the other. A page read that is not awaited (the walk broke
  // off) has its rejection caught, so it is never unhandled.
  const read = (from: number) => {
    const page = chainPage(sequelize, organisationId, from, size, PAGE);
    page.catch(() => {});
    return page;
  };
  let next: ReturnType<typeof read> | null = read(checker.expected);
  walk: while (checker.expected <= size) {
    const rows = await (next ?? read(checker.expected));
    next = null;
    const last = rows.length > 0 ? Number(rows[rows.length - 1]!.sequence) : 0;
    if (last > 0 && last < size) next = read(last + 1);
    if (rows.length === 0) {
      firstBreak = { sequence: checker.expected, verdictId: '', reason: `position ${checker.expected} is missing` };
      break;
    }
    for (const r of rows) {
      if (performance.now() - slice >= SLICE_MS) {
        await nextTurn();
        slice = performance.now();
      }
      firstBreak = await checker.check(r);
      if (firstBreak) break walk;
      tree.push(leafHash(Buffer.from(r.seal, 'hex')));
      checked++;
      // Each checkpoint on the way must have the root of the seals up to it, and a valid signature.
      while (nextCheckpoint < checkpoints.length && checkpoints[nextCheckpoint]!.treeSize === tree.size) {
        const c = checkpoints[nextCheckpoint++]!;
        if (tree.root().toString('hex') !== c.rootHash) findings.push(`the checkpoint of tree size ${c.treeSize} does not have the root of the seals up to it`);
        const sig = await checkpointSignatureProblem(sequelize, c);
        if (sig) findings.push(`the checkpoint of tree size ${c.treeSize}: ${sig}`);
      }
    }
    if (performance.now() - beat >= HEARTBEAT_MS) {
      await progress();
      beat = performance.now();
    }
  }
  if (firstBreak) findings.unshift(`position ${firstBreak.sequence}: ${firstBreak.reason}`);
  await sequelize.query(
    `UPDATE ledger_walks SET status = 'finished', checked = $2, intact = $3, first_break = $4, findings = $5, heartbeat_at = now(), finished_at = now() WHERE id = $1`,
    { bind: [id, checked, findings.length === 0, firstBreak ? JSON.stringify(firstBreak) : null, JSON.stringify(findings)] },
  );
}
