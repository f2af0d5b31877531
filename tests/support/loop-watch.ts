// Watching the event loop while a server in this process works: /healthz asked again and again,
// and a 5 ms timer that notes, between two of its turns, the wall-clock time and the CPU time of the
// main thread — so a test can tell the server's own hold on the loop from the time a busy shared
// machine did not schedule this process at all. Shared by the fault tests of heavy requests.
import { readFileSync } from 'node:fs';
import { Agent, request as httpRequest } from 'node:http';
import { cpus, loadavg } from 'node:os';


/** CPU time in ms the main thread of this process has used (utime + stime, Linux, 10 ms ticks). */
function mainThreadCpuMs(): number {
  const stat = readFileSync(`/proc/self/task/${process.pid}/stat`, 'utf8');
  const f = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
  return ((Number(f[11]) + Number(f[12])) * 1000) / 100;
}



/** A GET (or POST) over node:http that counts the answer's bytes and keeps its text only if asked. */
function callAt(base: () => string, agent: Agent, method: 'GET' | 'POST', path: string, headers: Record<string, string> = {}, keep = true): Promise<{ status: number; bytes: number; text: string }> {
  return new Promise((resolve, reject) => {
    const req = httpRequest(`${base()}${path}`, { method, headers, agent }, (res) => {
      let bytes = 0;
      const parts: Buffer[] = [];
      res.on('data', (c: Buffer) => {
        bytes += c.length;
        if (keep) parts.push(c);
      });
      // the text is put together when asked for, after any measurement
      res.on('end', () => resolve({ status: res.statusCode ?? 0, bytes, get text() { return Buffer.concat(parts).toString('utf8'); } }));
      res.on('error', reject);
    });
    req.on('error', reject);
    req.end();
  });
}

export interface Watch {
  /** Wall-clock latency of each /healthz answer, in ms. */
  healthz: number[];
  /** The longest the event loop went without a turn (a 5 ms timer's delay), in ms of wall-clock time. */
  stallMs: number;
  /** The most CPU time the main thread spent between two turns of that timer: the longest hold by the server's own work. */
  holdMs: number;
}

/**
 * Runs `work` while asking /healthz again and again (one at a time, 5 ms apart) and while a 5 ms
 * timer notes, between two of its turns, the wall-clock time and the CPU time of the main thread.
 * On a busy shared machine (here two cores under a load of 8 or more from other processes) a
 * wall-clock wait also counts time this process was not scheduled at all; the main thread's CPU
 * time between two turns counts only what the server itself held the event loop with.
 */
async function watchWith<T>(call: Caller, work: () => Promise<T>): Promise<{ result: T } & Watch> {
  const healthz: number[] = [];
  let done = false;
  const probe = (async () => {
    while (!done) {
      const t0 = performance.now();
      const res = await call('GET', '/healthz');
      if (res.status !== 200) throw new Error(`/healthz answered ${res.status}`);
      healthz.push(performance.now() - t0);
      await new Promise((r) => setTimeout(r, 5));
    }
  })();
  let stallMs = 0;
  let holdMs = 0;
  let lastWall = performance.now();
  let lastCpu = mainThreadCpuMs();
  const tick = setInterval(() => {
    const wall = performance.now();
    const cpu = mainThreadCpuMs();
    stallMs = Math.max(stallMs, wall - lastWall - 5);
    holdMs = Math.max(holdMs, cpu - lastCpu);
    lastWall = wall;
    lastCpu = cpu;
  }, 5);
  try {
    const result = await work();
    return { result, healthz, stallMs, holdMs };
  } finally {
    clearInterval(tick);
    done = true;
    await probe;
  }
}

export const describeWatch = (w: Watch) =>
  `/healthz ${w.healthz.length} answers, slowest ${Math.max(...w.healthz).toFixed(0)} ms, median ${[...w.healthz].sort((a, b) => a - b)[w.healthz.length >> 1]!.toFixed(0)} ms; ` +
  `longest event-loop stall ${w.stallMs.toFixed(0)} ms, of which the main thread held it ${w.holdMs.toFixed(0)} ms at most; load average ${loadavg()[0]!.toFixed(1)} on ${cpus().length} cores`;

type Caller = (method: 'GET' | 'POST', path: string, headers?: Record<string, string>, keep?: boolean) => Promise<{ status: number; bytes: number; text: string }>;

/** `call` and `watchWhile` against the server at `base()` (read at each call, as it starts after the module loads). */
export function loopWatch(base: () => string): { call: Caller; watchWhile: <T>(work: () => Promise<T>) => Promise<{ result: T } & Watch> } {
  const agent = new Agent({ keepAlive: true, maxSockets: 4 });
  const call: Caller = (method, path, headers = {}, keep = true) => callAt(base, agent, method, path, headers, keep);
  return { call, watchWhile: (work) => watchWith(call, work) };
}
