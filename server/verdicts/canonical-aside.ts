// The canonical bytes of a big lot's number arrays, written on a worker thread while the main thread
// runs the engine: for a lot of a million measurements both take tens of milliseconds, and on two
// cores they overlap instead of adding up (bench:api, the 1 000 000-measurement lot).
//
// One worker per process, started on first use and not keeping the process alive; until it has
// loaded (a few hundred milliseconds, once) lots are written on the main thread. Whatever goes
// wrong with it (it cannot start, it dies, a value is not a finite number), the caller gets no
// bytes for that array and canonical.ts writes them on the main thread as before: the worker only
// ever saves time, it never decides what a record holds.
// Own code: worker pools on npm start a thread per task or need a separate compiled file; this is
// one long-lived thread with one message type.
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { AsideMessage, AsideRequest } from './canonical-aside.worker';

/** Arrays shorter than this are written on the main thread: posting them costs more than it saves. */
export const ASIDE_MIN_LENGTH = 50_000;

let worker: Worker | null = null;
let ready = false;
let nextId = 1;
/** Jobs sent to the worker, by id: each is settled with its bytes, or with null. */
const waiting = new Map<number, (b: Buffer | null) => void>();

function settleAll(): void {
  for (const settle of waiting.values()) settle(null);
  waiting.clear();
}

/** The ES module entry of tsx's API, as its package.json declares it ("./esm/api" → "import"). */
function tsxApiUrl(): string {
  const manifestPath = createRequire(import.meta.url).resolve('tsx/package.json');
  const manifest = JSON.parse(readFileSync(manifestPath, 'utf8')) as { exports: Record<string, { import: { default: string } }> };
  return pathToFileURL(join(dirname(manifestPath), manifest.exports['./esm/api']!.import.default)).href;
}

function startWorker(): Worker {
  // The worker is TypeScript like the rest of the server, so it is loaded through tsx's API (the
  // server itself runs under tsx). Its first act is to say it is ready.
  const entry = new URL('./canonical-aside.worker.ts', import.meta.url).href;
  const code = `import(${JSON.stringify(tsxApiUrl())}).then((tsx) => tsx.tsImport(${JSON.stringify(entry)}, ${JSON.stringify(entry)}));`;
  const w = new Worker(code, { eval: true });
  w.unref();
  w.on('message', (m: AsideMessage) => {
    if ('ready' in m) {
      if (worker === w) ready = true;
      return;
    }
    const settle = waiting.get(m.id);
    if (!settle) return;
    waiting.delete(m.id);
    settle(m.bytes ? Buffer.from(m.bytes.buffer, m.bytes.offset, m.bytes.length) : null);
  });
  const gone = () => {
    if (worker === w) {
      worker = null;
      ready = false;
    }
    settleAll();
  };
  w.on('error', gone);
  w.on('exit', gone);
  return w;
}

/** The values as doubles, or null when one is not a number (then nothing is sent). */
function asDoubles(a: readonly unknown[]): Float64Array<ArrayBuffer> | null {
  const f = new Float64Array(new ArrayBuffer(8 * a.length));
  for (let i = 0; i < a.length; i++) {
    const v = a[i];
    if (typeof v !== 'number') return null;
    f[i] = v;
  }
  return f;
}

/**
 * Starts writing the canonical bytes of each big array on the worker and returns at once; await
 * the result after the main thread's own work. The map holds an entry only for the arrays the
 * worker wrote; pass it to canonicalContentParts. Never rejects.
 */
export function writeNumberArraysAside(arrays: readonly (readonly unknown[] | undefined | null)[]): Promise<Map<unknown, Buffer>> {
  const big = arrays.filter((a): a is readonly unknown[] => Array.isArray(a) && a.length >= ASIDE_MIN_LENGTH);
  if (big.length === 0) return Promise.resolve(new Map());
  if (!worker || !ready) {
    startAsideWorker(); // for the next lot; this one is written on the main thread
    return Promise.resolve(new Map());
  }
  const w = worker;
  const jobs = big.map(
    (array) =>
      new Promise<[readonly unknown[], Buffer | null]>((resolve) => {
        const values = asDoubles(array);
        if (!values) return resolve([array, null]);
        const id = nextId++;
        try {
          waiting.set(id, (b) => resolve([array, b]));
          const request: AsideRequest = { id, values };
          w.postMessage(request, [values.buffer]);
        } catch {
          waiting.delete(id);
          resolve([array, null]);
        }
      }),
  );
  return Promise.all(jobs).then((done) => {
    const known = new Map<unknown, Buffer>();
    for (const [array, bytes] of done) if (bytes) known.set(array, bytes);
    return known;
  });
}

/** Starts the worker ahead of the first big lot (server start); harmless to call again. */
export function startAsideWorker(): void {
  try {
    worker ??= startWorker();
  } catch {
    // lots are then written on the main thread
  }
}

/** True once the worker has loaded and takes arrays. */
export function asideWorkerReady(): boolean {
  return ready;
}

/** Stops the worker (tests; a server's exit does not wait for it). */
export async function stopAsideWorker(): Promise<void> {
  const w = worker;
  worker = null;
  ready = false;
  settleAll();
  if (w) await w.terminate();
}
