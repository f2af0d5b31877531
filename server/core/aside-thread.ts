// The aside thread: one worker thread per process for the server's heavy pure work — parsing and
// judging a lot of a million measurements, re-judging a stored one — so the event loop keeps
// serving other requests (/healthz within 100 ms) while it runs. Pure work only: a task takes
// plain data and gives plain data back (typed arrays travel without a copy), never touches the
// database, a request or a timer.
//
// A task is a function exported by some module of the server, named with `asideTask`; the thread
// loads that module (through tsx's API, as the server is TypeScript) the first time it runs one of
// its tasks. The thread is started by the first task (or `startAsideThread` at server start) and
// does not keep the process alive; tasks queue on it one at a time. When it cannot start, a task
// runs on the main thread instead (the answer never depends on where it ran); when it dies with
// tasks in hand, each of them fails with Unavailable (a 503: nothing was changed, try again).
// Own code: worker pools on npm start a thread per task or need a separate compiled file.
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { isMainThread, parentPort, Worker, workerData, type TransferListItem } from 'node:worker_threads';
import { Unavailable } from './errors';

/** What a task gives back: its value, and the buffers of it to move rather than copy. */
export interface AsideResult<R> {
  value: R;
  transfer?: ArrayBuffer[];
}

/** A function that may run on the aside thread: where it is exported, and the function itself (for the main thread). */
export interface AsideTask<A, R> {
  module: string;
  name: string;
  run: (args: A) => AsideResult<R>;
}

/**
 * Names `run`, exported as `name` by the module at `moduleUrl` (its `import.meta.url`), as a task
 * of the aside thread. The module must be safe to load in a worker: no I/O when it is imported.
 */
export function asideTask<A, R>(moduleUrl: string, name: string, run: (args: A) => AsideResult<R>): AsideTask<A, R> {
  return { module: moduleUrl, name, run };
}

const ROLE = 'lotproof-aside-thread';
/** How long the first task waits for the thread to load before running on the main thread. */
const LOAD_TIMEOUT_MS = 30_000;
/** After a failed load the main thread does the work for this long before the thread is tried again. */
const RETRY_AFTER_MS = 60_000;

interface Job {
  job: number;
  module: string;
  name: string;
  args: unknown;
}
type Reply = { ready: true } | { job: number; value: unknown } | { job: number; error: string };

/** The thread (once it has said it is ready), or the promise of it while it loads. */
let thread: Promise<Worker | null> | null = null;
let failedAt = -Infinity;
/** Which load is the current one (a thread gone clears `thread` only if it is its own). */
let generation = 0;
let nextJob = 1;
const pending = new Map<number, { resolve: (v: unknown) => void; reject: (e: Error) => void }>();

/** The ES module entry of tsx's API, as its package.json declares it ("./esm/api" → "import"). */
function tsxApiUrl(): string {
  const manifestPath = createRequire(import.meta.url).resolve('tsx/package.json');
  const manifest = JSON.parse(readFileSync(manifestPath, 'utf8')) as { exports: Record<string, { import: { default: string } }> };
  return pathToFileURL(join(dirname(manifestPath), manifest.exports['./esm/api']!.import.default)).href;
}

function loadThread(): Promise<Worker | null> {
  const mine = ++generation;
  return new Promise((resolve) => {
    let w: Worker;
    try {
      // One tsx namespace for the thread: every task module it loads shares one module graph.
      const entry = import.meta.url;
      const code =
        `import(${JSON.stringify(tsxApiUrl())}).then((tsx) => { const ns = tsx.register({ namespace: 'lotproof-aside' }); ` +
        `globalThis[Symbol.for('lotproof.asideImport')] = (m) => ns.import(m, ${JSON.stringify(entry)}); return ns.import(${JSON.stringify(entry)}, ${JSON.stringify(entry)}); });`;
      w = new Worker(code, { eval: true, workerData: { role: ROLE } });
    } catch {
      failedAt = performance.now();
      resolve(null);
      return;
    }
    w.unref();
    let ready = false;
    const timer = setTimeout(() => void w.terminate(), LOAD_TIMEOUT_MS);
    timer.unref();
    w.on('message', (m: Reply) => {
      if ('ready' in m) {
        ready = true;
        clearTimeout(timer);
        resolve(w);
        return;
      }
      const waiter = pending.get(m.job);
      if (!waiter) return;
      pending.delete(m.job);
      if ('value' in m) waiter.resolve(m.value);
      else waiter.reject(new Error(`a task failed on the aside thread: ${m.error}`));
    });
    let gone = false;
    const onGone = () => {
      if (gone) return;
      gone = true;
      clearTimeout(timer);
      if (!ready) failedAt = performance.now();
      resolve(null); // no effect once it was ready
      if (generation === mine) thread = null;
      // Only this thread is ever sent tasks while it lives, so every task waiting is one of its own.
      for (const waiter of pending.values()) waiter.reject(new Unavailable('the work was interrupted; nothing was changed. Try again.'));
      pending.clear();
    };
    w.on('error', onGone);
    w.on('exit', onGone);
  });
}

/** Starts the aside thread ahead of the first task (server start); harmless to call again. */
export function startAsideThread(): void {
  if (performance.now() - failedAt < RETRY_AFTER_MS) return;
  thread ??= loadThread();
}

/**
 * Runs the task on the aside thread, moving the buffers in `transfer` there (they are unusable
 * here afterwards); on the main thread when the aside thread cannot start. Rejects with
 * Unavailable when the thread dies meanwhile.
 */
export async function runAside<A, R>(task: AsideTask<A, R>, args: A, transfer: ArrayBuffer[] = []): Promise<R> {
  startAsideThread();
  const w = thread ? await thread : null;
  if (!w) return task.run(args).value;
  const job = nextJob++;
  return new Promise<R>((resolve, reject) => {
    pending.set(job, { resolve: resolve as (v: unknown) => void, reject });
    try {
      w.postMessage({ job, module: task.module, name: task.name, args } satisfies Job, transfer as TransferListItem[]);
    } catch (err) {
      pending.delete(job);
      reject(err as Error);
    }
  });
}

/** Stops the aside thread (tests; a server's exit does not wait for it). */
export async function stopAsideThread(): Promise<void> {
  const w = thread ? await thread : null;
  thread = null;
  if (w) await w.terminate();
}

// On the aside thread: run each task sent, one at a time, in the order sent.
if (!isMainThread && (workerData as { role?: string } | null)?.role === ROLE && parentPort) {
  const port = parentPort;
  const importer = (globalThis as Record<symbol, (m: string) => Promise<Record<string, unknown>>>)[Symbol.for('lotproof.asideImport')]!;
  const modules = new Map<string, Promise<Record<string, unknown>>>();
  let queue: Promise<void> = Promise.resolve();
  port.on('message', ({ job, module, name, args }: Job) => {
    queue = queue.then(async () => {
      let reply: Reply;
      let transfer: ArrayBuffer[] = [];
      try {
        let mod = modules.get(module);
        if (!mod) modules.set(module, (mod = importer(module)));
        const task = (await mod)[name] as AsideTask<unknown, unknown> | undefined;
        if (!task || typeof task.run !== 'function') throw new Error(`${module} exports no aside task ${name}`);
        const result = task.run(args);
        reply = { job, value: result.value };
        transfer = result.transfer ?? [];
      } catch (err) {
        reply = { job, error: err instanceof Error ? err.message : String(err) };
      }
      try {
        port.postMessage(reply, transfer);
      } catch (err) {
        port.postMessage({ job, error: `its answer could not be sent: ${err instanceof Error ? err.message : String(err)}` } satisfies Reply);
      }
    });
  });
  port.postMessage({ ready: true } satisfies Reply);
}
