// The README's commands work from any folder: a checkout under a folder of mode 0700 (a clone in /root,
// say) cannot be entered by the postgres user the cluster runs as, so its cluster lives in a stand-in
// folder under /var/lib/lotproof — found again on the next start, and the user's folders untouched.
// The same holds for the throwaway clusters `npm test` and tests make with startCluster.
import { execFileSync } from 'node:child_process';
import { chmodSync, copyFileSync, cpSync, existsSync, mkdirSync, mkdtempSync, rmSync, statSync, symlinkSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import pg from 'pg';
import { afterAll, describe, expect, it } from 'vitest';
import { destroyCluster, freePort, startCluster, type RunningCluster } from '../../server/platform/embedded-postgres';
import { postgresServing, standInFrom, startProduct, type StartedProduct } from '../support/start-process';

const repo = process.cwd();
const isRoot = process.getuid?.() === 0;
// Like /root: a folder only its owner may enter.
const privateTop = mkdtempSync(join(tmpdir(), 'lotproof-private-'));
chmodSync(privateTop, 0o700);
const standIns = new Set<string>();
const started: StartedProduct[] = [];
let throwaway: RunningCluster | null = null;

afterAll(() => {
  if (throwaway) destroyCluster(throwaway);
  // A failed test may have left its cluster running: stop it before removing its folder.
  for (const dir of standIns) for (const pid of postgresServing(dir)) process.kill(pid, 'SIGQUIT');
  for (const p of started) p.kill9();
  for (const dir of standIns) rmSync(dir, { recursive: true, force: true });
  rmSync(privateTop, { recursive: true, force: true });
});

const modeOf = (path: string) => statSync(path).mode & 0o7777;

/**
 * A copy of this checkout as it is now (committed or not: tracked and new files, not the ignored ones),
 * as a fresh clone would have it, with the repository's node_modules linked in rather than installed.
 */
function copyCheckout(to: string): void {
  const files = execFileSync('git', ['ls-files', '-z', '--cached', '--others', '--exclude-standard'], { cwd: repo, encoding: 'utf8' })
    .split('\0')
    .filter(Boolean);
  for (const file of files) {
    if (file === 'node_modules' || !existsSync(join(repo, file))) continue; // linked below; moved or deleted in the working tree
    mkdirSync(dirname(join(to, file)), { recursive: true });
    copyFileSync(join(repo, file), join(to, file));
  }
  symlinkSync(join(repo, 'node_modules'), join(to, 'node_modules'));
}

/** After Ctrl-C: waits for the command to finish stopping, then expects no PostgreSQL of the cluster left. */
async function expectStoppedClean(p: StartedProduct, clusterDir: string, moment: string): Promise<void> {
  p.ctrlC();
  await p.gone();
  expect(postgresServing(clusterDir), `${moment}: PostgreSQL left running\n${p.output()}`).toEqual([]);
  expect(existsSync(join(clusterDir, 'data', 'postmaster.pid')), `${moment}: postmaster.pid left`).toBe(false);
}

describe.runIf(isRoot)('from a folder the postgres user cannot enter', () => {
  it('a throwaway cluster made as npm test makes it starts, takes connections and is removed', async () => {
    const dir = mkdtempSync(join(privateTop, 'lotproof-test-pg-'));
    throwaway = startCluster({ dir, port: await freePort(), database: 'private_check' });
    standIns.add(throwaway.dir);
    expect(throwaway.requestedDir).toBe(dir);
    expect(throwaway.dir.startsWith('/var/lib/lotproof/') || throwaway.dir.startsWith(tmpdir())).toBe(true);
    const client = new pg.Client({ connectionString: throwaway.url });
    await client.connect();
    try {
      expect((await client.query('SELECT current_database() AS db')).rows[0].db).toBe('private_check');
    } finally {
      await client.end();
    }
    const cluster = throwaway;
    throwaway = null;
    destroyCluster(cluster);
    expect(postgresServing(cluster.dir)).toEqual([]);
    expect(existsSync(cluster.dir)).toBe(false);
    expect(existsSync(dir)).toBe(false);
    expect(modeOf(privateTop), 'the private folder keeps its mode').toBe(0o700);
  });

  it('npm start from a clone inside it: stops clean on Ctrl-C while the console builds, then comes up and reuses its cluster', async () => {
    const clone = join(privateTop, 'clone');
    copyCheckout(clone);
    const port = await freePort();
    const env = { PORT: String(port), LOTPROOF_PG_PORT: String(await freePort()), LOTPROOF_DATA_DIR: undefined };

    // First start: no dist/console in the clone, so it builds the console; Ctrl-C while it does.
    const first = startProduct(clone, env);
    started.push(first);
    await first.waitFor('Building the console');
    const standIn = standInFrom(first.output());
    expect(standIn, `the start says where the cluster is:\n${first.output()}`).not.toBeNull();
    standIns.add(standIn!);
    expect(first.output()).toContain(`PostgreSQL cluster for ${join(clone, '.data', 'postgres')} is in ${standIn} (the postgres user cannot reach`);
    expect(standIn!.startsWith(`${clone}/`)).toBe(false);
    await new Promise((r) => setTimeout(r, 1_500)); // well into the build
    await expectStoppedClean(first, standIn!, 'Ctrl-C while the console builds');
    expect(existsSync(join(standIn!, 'data', 'PG_VERSION'))).toBe(true);

    // Second start, with the console already built (copied, to keep the test short): it comes up.
    rmSync(join(clone, 'dist'), { recursive: true, force: true });
    cpSync(join(repo, 'dist', 'console'), join(clone, 'dist', 'console'), { recursive: true });
    const second = startProduct(clone, env);
    started.push(second);
    await second.waitFor('Press Ctrl-C to stop.');
    expect(standInFrom(second.output()), 'the same cluster folder, found again').toBe(standIn);
    expect(second.output()).not.toContain('Creating a PostgreSQL cluster');
    expect((await fetch(`http://127.0.0.1:${port}/readyz`)).status).toBe(200);
    expect((await fetch(`http://127.0.0.1:${port}/`)).status).toBe(200);
    expect(postgresServing(standIn!)).toHaveLength(1);
    await expectStoppedClean(second, standIn!, 'Ctrl-C after the start');

    // Nothing of the user's was chmod-ed or chown-ed to let postgres in.
    expect(modeOf(privateTop)).toBe(0o700);
    expect(statSync(privateTop).uid).toBe(0);
    expect(statSync(join(clone, '.data')).uid).toBe(0);
    expect(existsSync(join(clone, '.data', 'postgres')), 'no cluster folder in the unreachable data folder').toBe(false);
  });
});
