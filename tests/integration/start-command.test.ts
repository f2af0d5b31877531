// `npm start` with its embedded default: a local cluster in the data folder, API + docs + console on
// one port; SIGINT (Ctrl-C) stops the server and the cluster, at any moment of the start-up too; a
// second run reuses the cluster, also when the first was killed with -9 and left PostgreSQL running.
import { chmodSync, existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { freePort } from '../../server/platform/embedded-postgres';
import { postgresServing, postmasterPid, processAlive, startProduct, type StartedProduct } from '../support/start-process';

const dataDirs: string[] = [];
const started: StartedProduct[] = [];

/** A data folder like a checkout's .data: the postgres user can enter it, so the cluster is <dataDir>/postgres. */
function newDataDir(): string {
  const dir = mkdtempSync(join(tmpdir(), 'lotproof-start-'));
  chmodSync(dir, 0o755);
  dataDirs.push(dir);
  return dir;
}

async function product(dataDir: string, port: number, pgPort: number): Promise<StartedProduct> {
  const p = startProduct(process.cwd(), { PORT: String(port), LOTPROOF_PG_PORT: String(pgPort), LOTPROOF_DATA_DIR: dataDir });
  started.push(p);
  return p;
}

/** After Ctrl-C: waits for the command to finish stopping, then expects no PostgreSQL of the cluster left. */
async function expectStoppedClean(p: StartedProduct, clusterDir: string, moment: string): Promise<void> {
  p.ctrlC();
  await p.gone();
  expect(postgresServing(clusterDir), `${moment}: PostgreSQL left running\n${p.output()}`).toEqual([]);
  expect(existsSync(join(clusterDir, 'data', 'postmaster.pid')), `${moment}: postmaster.pid left`).toBe(false);
}

afterAll(() => {
  // A failed test may have left its cluster running: stop it before removing its folder.
  for (const dir of dataDirs) for (const pid of postgresServing(join(dir, 'postgres'))) process.kill(pid, 'SIGQUIT');
  for (const p of started) p.kill9();
  for (const dir of dataDirs) rmSync(dir, { recursive: true, force: true });
});

describe('the start command', () => {
  it('serves console, docs and readiness on one port, stops its cluster on Ctrl-C, and starts again', async () => {
    const dataDir = newDataDir();
    const port = await freePort();
    const pgPort = await freePort();
    for (const run of [1, 2]) {
      const p = await product(dataDir, port, pgPort);
      await p.waitFor('Press Ctrl-C to stop.');
      const base = `http://127.0.0.1:${port}`;
      expect(p.output()).toContain(`${base}/docs`);
      expect((await fetch(`${base}/readyz`)).status).toBe(200);
      expect((await fetch(`${base}/docs/`)).status).toBe(200);
      const home = await fetch(`${base}/`);
      expect(home.status).toBe(200);
      expect(await home.text()).toContain('<div id="app"></div>');
      // The data folder is reachable by postgres, so the cluster stays where it always was.
      const postmaster = postmasterPid(join(dataDir, 'postgres'));
      expect(postmaster, `run ${run}: cluster running in <dataDir>/postgres`).not.toBeNull();
      expect(processAlive(postmaster!)).toBe(true);
      await expectStoppedClean(p, join(dataDir, 'postgres'), `run ${run}`);
      expect(processAlive(postmaster!), `run ${run}: PostgreSQL stopped`).toBe(false);
    }
  });

  it('stops the cluster on Ctrl-C right after /readyz answers and while the cluster starts, and on a SIGTERM to the server alone', async () => {
    const dataDir = newDataDir();
    const clusterDir = join(dataDir, 'postgres');
    const port = await freePort();
    const pgPort = await freePort();
    const readyz = `http://127.0.0.1:${port}/readyz`;

    // Right after /readyz first answers: the demo is still being seeded.
    let p = await product(dataDir, port, pgPort);
    await p.waitForOk(readyz);
    await expectStoppedClean(p, clusterDir, 'Ctrl-C right after /readyz');

    // While the server of the (existing) cluster starts: nothing of the API is up yet.
    p = await product(dataDir, port, pgPort);
    await p.waitFor(`Starting PostgreSQL on 127.0.0.1:${pgPort}`);
    await expectStoppedClean(p, clusterDir, 'Ctrl-C while the cluster starts');
    expect(p.output()).not.toContain('Lotproof is running');

    // SIGTERM to the server process alone: PostgreSQL gets no signal of its own, so the server must stop it.
    p = await product(dataDir, port, pgPort);
    await p.waitForOk(readyz);
    p.signalServer('SIGTERM');
    await p.gone();
    expect(postgresServing(clusterDir), `SIGTERM right after /readyz: PostgreSQL left running\n${p.output()}`).toEqual([]);
  });

  it('after a kill -9 of the start command, the next start takes over the cluster left running and stops it on Ctrl-C', async () => {
    const dataDir = newDataDir();
    const clusterDir = join(dataDir, 'postgres');
    const port = await freePort();
    const pgPort = await freePort();

    const first = await product(dataDir, port, pgPort);
    await first.waitFor('Press Ctrl-C to stop.');
    const postmaster = postmasterPid(clusterDir)!;
    expect(first.kill9Node().length, 'npm and the server killed').toBeGreaterThanOrEqual(2);
    await new Promise((r) => setTimeout(r, 500));
    // Only Node.js was killed: PostgreSQL runs on, orphaned, holding the port. That is the case to handle.
    expect(processAlive(postmaster), 'the cluster survived the kill').toBe(true);
    expect(postgresServing(clusterDir)).toEqual([postmaster]);

    const second = await product(dataDir, port, pgPort);
    await second.waitFor('Press Ctrl-C to stop.');
    expect(second.output()).toContain(`PostgreSQL left running in ${join(clusterDir, 'data')} by an earlier start (pid ${postmaster}`);
    expect(second.output()).not.toContain('is taken by another program');
    expect(second.output()).not.toContain('Creating a PostgreSQL cluster');
    expect((await fetch(`http://127.0.0.1:${port}/readyz`)).status).toBe(200);
    expect(processAlive(postmaster), 'the orphan was stopped').toBe(false);
    const restarted = postmasterPid(clusterDir)!;
    expect(postgresServing(clusterDir)).toEqual([restarted]);
    await expectStoppedClean(second, clusterDir, 'Ctrl-C of the second start');
    expect(processAlive(restarted)).toBe(false);
  });
});
