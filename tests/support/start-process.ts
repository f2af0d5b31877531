// The start command as a user runs it (`npx tsx server/bin/start.ts`), in a process group of its own so
// a test can press Ctrl-C the way a terminal does (SIGINT to the whole group) or kill it hard, and then
// look for PostgreSQL servers it left behind. Real processes throughout; nothing is mocked.
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { readdirSync, readFileSync, readlinkSync } from 'node:fs';
import { basename, join } from 'node:path';

export interface StartedProduct {
  proc: ChildProcess;
  output: () => string;
  /** Waits until the output contains `text`; fails when the command exits first or time runs out. */
  waitFor: (text: string, timeoutMs?: number) => Promise<void>;
  /** Polls `url` until it answers 200; fails when the command exits first or time runs out. */
  waitForOk: (url: string, timeoutMs?: number) => Promise<void>;
  /** Ctrl-C: SIGINT to every process of the group (npx, tsx, the server and its children). */
  ctrlC: () => void;
  /** A signal to the server process alone (as `kill <pid>` or a service manager would send it), not to npx, tsx or PostgreSQL. */
  signalServer: (sig: NodeJS.Signals) => void;
  /** kill -9 of every process of the group. */
  kill9: () => void;
  /** kill -9 of the command's Node.js processes only (npx, tsx, the server), as a crash of it would; returns their pids. */
  kill9Node: () => number[];
  /** Resolves once no process of the group is left (the server, and PostgreSQL when started as its child, have stopped). */
  gone: (timeoutMs?: number) => Promise<void>;
}

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

/** `extraEnv` values of `undefined` remove the variable (DATABASE_URL, LOTPROOF_DATA_DIR). */
export function startProduct(cwd: string, extraEnv: Record<string, string | undefined>, args: string[] = []): StartedProduct {
  const env: NodeJS.ProcessEnv = { ...process.env, NODE_ENV: 'development', LOG_LEVEL: 'warn' };
  delete env.DATABASE_URL;
  delete env.LOTPROOF_VALIDATE_RESPONSES;
  for (const [k, v] of Object.entries(extraEnv)) {
    if (v === undefined) delete env[k];
    else env[k] = v;
  }
  // Exactly the README's command (npm start runs node with the tsx loader, no signal-relaying wrapper).
  const proc = spawn('npm', ['start', '--', ...args], { cwd, env, stdio: ['ignore', 'pipe', 'pipe'], detached: true });
  let out = '';
  proc.stdout!.on('data', (d) => (out += d));
  proc.stderr!.on('data', (d) => (out += d));
  const pgid = proc.pid!;
  const groupAlive = () => spawnSync('pgrep', ['-g', String(pgid)]).status === 0;
  const signalGroup = (sig: NodeJS.Signals) => {
    try {
      process.kill(-pgid, sig);
    } catch {
      // the group has gone already
    }
  };
  const nodeProcesses = () =>
    spawnSync('pgrep', ['-g', String(pgid)], { encoding: 'utf8' })
      .stdout.split('\n')
      .filter(Boolean)
      .map(Number)
      .filter((pid) => {
        try {
          return basename(readlinkSync(`/proc/${pid}/exe`)) === basename(process.execPath);
        } catch {
          return false;
        }
      });
  const until = async (done: () => boolean | Promise<boolean>, what: string, timeoutMs: number) => {
    const deadline = Date.now() + timeoutMs;
    while (!(await done())) {
      if (proc.exitCode !== null || proc.signalCode !== null) throw new Error(`start exited before ${what}:\n${out}`);
      if (Date.now() > deadline) throw new Error(`no ${what} within ${timeoutMs} ms:\n${out}`);
      await sleep(100);
    }
  };
  return {
    proc,
    output: () => out,
    waitFor: (text, timeoutMs = 90_000) => until(() => out.includes(text), JSON.stringify(text), timeoutMs),
    waitForOk: (url, timeoutMs = 90_000) =>
      until(async () => (await fetch(url).catch(() => null))?.status === 200, `200 from ${url}`, timeoutMs),
    ctrlC: () => signalGroup('SIGINT'),
    kill9: () => signalGroup('SIGKILL'),
    signalServer: (sig) => {
      // npm runs the server as a child node with the tsx loader: the node whose command line names the start script.
      const server = nodeProcesses().filter((pid) => readFileSync(`/proc/${pid}/cmdline`, 'latin1').includes('--import\0tsx\0server/bin/start.ts'));
      if (server.length !== 1) throw new Error(`expected one server process in the group, found ${server.length}`);
      process.kill(server[0]!, sig);
    },
    kill9Node: () => {
      const node = nodeProcesses();
      for (const pid of node) process.kill(pid, 'SIGKILL');
      return node;
    },
    gone: async (timeoutMs = 30_000) => {
      const deadline = Date.now() + timeoutMs;
      while (groupAlive()) {
        if (Date.now() > deadline) {
          // name what is left, so a failure says which process did not stop
          const left = spawnSync('ps', ['-o', 'pid,stat,etime,args', '-g', String(pgid)], { encoding: 'utf8' }).stdout;
          throw new Error(`the start command's processes were still running ${timeoutMs} ms after the signal:\n${left}\n${out}`);
        }
        await sleep(100);
      }
    },
  };
}

/** Pids of PostgreSQL servers running on the cluster in `clusterDir` (a postmaster's command line names its data folder). */
export function postgresServing(clusterDir: string): number[] {
  const wanted = `\0-D\0${join(clusterDir, 'data')}\0`;
  const pids: number[] = [];
  for (const entry of readdirSync('/proc')) {
    if (!/^\d+$/.test(entry)) continue;
    try {
      if (`\0${readFileSync(`/proc/${entry}/cmdline`, 'latin1')}`.includes(wanted)) pids.push(Number(entry));
    } catch {
      // the process ended while we looked
    }
  }
  return pids;
}

/** The postmaster's pid from the cluster's postmaster.pid, or null when there is none. */
export function postmasterPid(clusterDir: string): number | null {
  try {
    return Number(readFileSync(join(clusterDir, 'data', 'postmaster.pid'), 'utf8').split('\n')[0]);
  } catch {
    return null;
  }
}

/** True while `pid` runs. A zombie counts as ended: here PID 1 may never reap a server whose pg_ctl has exited. */
export function processAlive(pid: number): boolean {
  try {
    return !/^\d+ \(.*\) Z /s.test(readFileSync(`/proc/${pid}/stat`, 'latin1'));
  } catch {
    return false;
  }
}

/** The stand-in folder the start command names ("PostgreSQL cluster for … is in <dir> (…)"), if it named one. */
export function standInFrom(output: string): string | null {
  return /PostgreSQL cluster for \S+ is in (\S+) \(/.exec(output)?.[1] ?? null;
}
