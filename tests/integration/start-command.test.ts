// `npm start` with its embedded default: a local cluster in the data folder, API + docs + console on
// one port; SIGINT (Ctrl-C) stops the server and the cluster; a second run reuses the cluster.
import { spawn, type ChildProcess } from 'node:child_process';
import { chmodSync, existsSync, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { freePort } from '../../server/platform/embedded-postgres';

const dataDir = mkdtempSync(join(tmpdir(), 'lotproof-start-'));
chmodSync(dataDir, 0o755); // like a checkout's .data folder: the postgres user must be able to enter it
let child: ChildProcess | null = null;

function processAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch {
    return false;
  }
}

async function startProduct(port: number, pgPort: number): Promise<{ proc: ChildProcess; output: () => string }> {
  const env: NodeJS.ProcessEnv = { ...process.env, PORT: String(port), LOTPROOF_PG_PORT: String(pgPort), LOTPROOF_DATA_DIR: dataDir, NODE_ENV: 'development', LOG_LEVEL: 'warn' };
  delete env.DATABASE_URL;
  delete env.LOTPROOF_VALIDATE_RESPONSES;
  // Its own process group, so that Ctrl-C can be sent to the group as a terminal does.
  const proc = spawn('npx', ['tsx', 'server/bin/start.ts'], { env, stdio: ['ignore', 'pipe', 'pipe'], detached: true });
  let out = '';
  proc.stdout!.on('data', (d) => (out += d));
  proc.stderr!.on('data', (d) => (out += d));
  const deadline = Date.now() + 90_000;
  while (!out.includes('Press Ctrl-C to stop.')) {
    if (proc.exitCode !== null) throw new Error(`start exited early:\n${out}`);
    if (Date.now() > deadline) throw new Error(`start did not come up:\n${out}`);
    await new Promise((r) => setTimeout(r, 200));
  }
  return { proc, output: () => out };
}

async function stopWithCtrlC(proc: ChildProcess): Promise<void> {
  // npx → node: signal the whole group, as a terminal's Ctrl-C does.
  const exited = new Promise<void>((r) => proc.once('exit', () => r()));
  process.kill(-proc.pid!, 'SIGINT');
  await exited;
}

afterAll(() => {
  try {
    if (child) process.kill(-child.pid!, 'SIGKILL');
  } catch {
    // the group has already gone
  }
  rmSync(dataDir, { recursive: true, force: true });
});

describe('the start command', () => {
  it('serves console, docs and readiness on one port, stops its cluster on Ctrl-C, and starts again', async () => {
    const port = await freePort();
    const pgPort = await freePort();
    for (const run of [1, 2]) {
      const { proc, output } = await startProduct(port, pgPort);
      child = proc;
      const base = `http://127.0.0.1:${port}`;
      expect(output()).toContain(`${base}/docs`);
      expect((await fetch(`${base}/readyz`)).status).toBe(200);
      expect((await fetch(`${base}/docs/`)).status).toBe(200);
      const home = await fetch(`${base}/`);
      expect(home.status).toBe(200);
      expect(await home.text()).toContain('<div id="app"></div>');
      const pidFile = join(dataDir, 'postgres', 'data', 'postmaster.pid');
      expect(existsSync(pidFile), `run ${run}: cluster running`).toBe(true);
      const postmaster = Number(readFileSync(pidFile, 'utf8').split('\n')[0]);
      expect(processAlive(postmaster)).toBe(true);
      await stopWithCtrlC(proc);
      // npx exits at once on Ctrl-C; the server finishes its shutdown (HTTP, then the cluster) just after.
      const deadline = Date.now() + 20_000;
      while (processAlive(postmaster) && Date.now() < deadline) await new Promise((r) => setTimeout(r, 100));
      expect(processAlive(postmaster), `run ${run}: PostgreSQL stopped`).toBe(false);
      expect(existsSync(pidFile)).toBe(false);
    }
  });
});
