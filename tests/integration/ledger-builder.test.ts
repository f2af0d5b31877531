// The tree store and the checkpoint schedule: two builders in two pools (as two processes) extending
// one organisation's tree at once store every perfect subtree exactly once, each equal to the naive
// RFC 9162 MTH of its leaves (tests/unit/merkle-naive.ts); the schedule issues a checkpoint for an
// organisation whose chain grew, and a round against an unreachable database resolves, logged.
import { Writable } from 'node:stream';
import { Sequelize } from 'sequelize';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startCheckpointSchedule } from '../../server/jobs/checkpoint-schedule';
import { latestCheckpoint } from '../../server/ledger/checkpoints';
import { extendTree } from '../../server/ledger/tree-store';
import { createLogger } from '../../server/logger';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createProduct, lotBody } from '../support/lots';
import { naiveTree } from '../unit/merkle-naive';

let a: TestApp;
let b: TestApp;
beforeAll(() => {
  a = buildTestApp();
  b = buildTestApp();
});
afterAll(async () => {
  await a.close();
  await b.close();
});

async function orgWithLots(name: string, n: number, seed: number): Promise<{ id: string; auth: { Authorization: string } }> {
  const org = await createTestOrganisation(name);
  const key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  const product = await createProduct(a.app, key);
  const auth = { Authorization: `Bearer ${key}` };
  for (let i = 0; i < n; i++) expect((await request(a.app).post('/v1/lots').set(auth).send(lotBody(product.sku, seed + i))).status).toBe(201);
  return { id: org.id, auth };
}

describe('building the tree', () => {
  it('two concurrent builders in two pools store each node once, equal to the naive MTH of its leaves', async () => {
    const org = await orgWithLots('Built twice packer', 37, 10);
    // Small batches, so the two builders take turns under the lock many times.
    const [x, y] = await Promise.all([extendTree(a.ctx.db.sequelize, org.id, undefined, 3), extendTree(b.ctx.db.sequelize, org.id, undefined, 4)]);
    expect([x, y]).toEqual([37, 37]);
    const sq = a.ctx.db.sequelize;
    const [sealRows] = await sq.query('SELECT seal FROM verdicts WHERE organisation_id = $1 ORDER BY sequence', { bind: [org.id] });
    const tree = naiveTree((sealRows as { seal: string }[]).map((r) => Buffer.from(r.seal, 'hex')));
    const [nodes] = await sq.query("SELECT level, idx::int AS idx, encode(hash, 'hex') AS hash FROM ledger_tree_nodes WHERE organisation_id = $1", { bind: [org.id] });
    const list = nodes as { level: number; idx: number; hash: string }[];
    // Perfect subtrees of 37 leaves: Σ floor(37 / 2^k) = 37 + 18 + 9 + 4 + 2 + 1.
    expect(list.length).toBe(71);
    for (const n of list) expect(n.hash, `${n.level}/${n.idx}`).toBe(tree.mthOf(n.idx * 2 ** n.level, (n.idx + 1) * 2 ** n.level).toString('hex'));

    // Extending again after more verdicts adds only the new nodes.
    const product = (await request(a.app).get('/v1/products').set(org.auth)).body.items[0];
    for (let i = 0; i < 3; i++) await request(a.app).post('/v1/lots').set(org.auth).send(lotBody(product.sku, 90 + i));
    expect(await extendTree(b.ctx.db.sequelize, org.id)).toBe(40);
    const [count] = await sq.query('SELECT count(*)::int AS n FROM ledger_tree_nodes WHERE organisation_id = $1', { bind: [org.id] });
    expect((count as { n: number }[])[0]!.n).toBe(40 + 20 + 10 + 5 + 2 + 1);
  }, 120_000);
});

describe('the checkpoint schedule', () => {
  it('issues a checkpoint for an organisation whose chain grew, and none when nothing changed', async () => {
    const org = await orgWithLots('Scheduled packer', 4, 40);
    const schedule = startCheckpointSchedule({ sequelize: a.ctx.db.sequelize, config: { ...a.ctx.config, verdicts: { ...a.ctx.config.verdicts, checkpointIntervalSeconds: 1 } }, logger: a.ctx.logger });
    try {
      const deadline = Date.now() + 15_000;
      while (!(await latestCheckpoint(a.ctx.db.sequelize, org.id)) && Date.now() < deadline) await new Promise((r) => setTimeout(r, 200));
      const c = await latestCheckpoint(a.ctx.db.sequelize, org.id);
      expect(c?.treeSize).toBe(4);
      await schedule.runOnce();
      expect((await latestCheckpoint(a.ctx.db.sequelize, org.id))).toEqual(c);
    } finally {
      await schedule.stop();
    }
  }, 60_000);

  it('a round against an unreachable database resolves and logs, and the loop goes on', async () => {
    const lines: string[] = [];
    const logger = createLogger('warn', new Writable({ write: (chunk, _e, cb) => (lines.push(String(chunk)), cb()) }));
    const gone = new Sequelize('postgres://nobody@127.0.0.1:1/none', { dialect: 'postgres', logging: false, pool: { acquire: 2_000 } });
    const schedule = startCheckpointSchedule({ sequelize: gone, config: a.ctx.config, logger });
    await expect(schedule.runOnce()).resolves.toBe(0);
    await expect(schedule.runOnce()).resolves.toBe(0);
    await schedule.stop();
    await gone.close();
    expect(lines.join('')).toMatch(/checkpoint round failed; will retry/);
  }, 30_000);
});
