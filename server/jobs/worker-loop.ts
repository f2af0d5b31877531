// A worker loop over one pg-boss queue, written here rather than taken from pg-boss's `work()`:
// there, a job's completion or failure is recorded without waiting for it or catching its error,
// so a database outage while a job runs becomes an unhandled rejection that ends the process; and
// each worker takes one batch per polling interval, however much is waiting. This loop fetches up
// to its free concurrency as soon as work is done or new work is queued (`wake`), runs each job on
// its own, and records completions and failures in batches whose errors are caught and logged (a
// job whose completion could not be recorded stays active until pg-boss expires and retries it;
// the handlers make such a repeat do nothing).
import type PgBoss from 'pg-boss';
import type { Logger } from 'pino';

export interface WorkerLoopOptions<T extends object> {
  boss: PgBoss;
  queue: string;
  logger: Logger;
  /** Jobs running at once in this process. */
  concurrency: number;
  /** Most jobs fetched in one round trip. */
  batchSize: number;
  /** How long to wait before asking again when the queue was empty (other processes queue work too). */
  pollMs: number;
  /** Starts the jobs fetched together: one promise per job, in order; a rejection fails the job (it is retried). */
  run: (jobs: PgBoss.JobWithMetadata<T>[]) => Promise<unknown>[];
  /** After jobs finish (e.g. to hand out more work). Must not throw. */
  onSettled?: () => void;
}

export interface WorkerLoop {
  /** Fetch now rather than after the polling interval (work was just queued). */
  wake: () => void;
  /** Stops fetching, lets running jobs finish (at most `graceMs`), records their outcomes. */
  stop: (graceMs: number) => Promise<void>;
}

const describe = (err: unknown) => ({ message: String((err as Error)?.message ?? err).slice(0, 300) });
const MAX_UNRECORDED = 10_000;
const RETRY_FLUSH_MS = 2_000;

export function startWorkerLoop<T extends object>(o: WorkerLoopOptions<T>): WorkerLoop {
  let stopping = false;
  let stopped = false;
  let wakeUp: (() => void) | null = null;
  const running = new Set<Promise<unknown>>();
  const completed: string[] = [];
  const failed: Array<{ id: string; message: string }> = [];
  let flushTimer: NodeJS.Timeout | null = null;
  let flushing: Promise<void> | null = null;

  // A wake that arrives while the loop is fetching is kept, so the pause after an empty fetch ends at once.
  let woken = false;
  const wake = () => {
    woken = true;
    wakeUp?.();
  };
  const pause = (ms: number) =>
    new Promise<void>((resolve) => {
      if (woken) {
        woken = false;
        return resolve();
      }
      const timer = setTimeout(done, ms);
      function done() {
        clearTimeout(timer);
        wakeUp = null;
        woken = false;
        resolve();
      }
      wakeUp = done;
    });

  const flush = (): Promise<void> =>
    (flushing ??= (async () => {
      try {
        while (completed.length > 0 || failed.length > 0) {
          const done = completed.splice(0, 500);
          const bad = failed.splice(0, 500);
          try {
            if (done.length) await o.boss.complete(o.queue, done);
            done.length = 0;
            if (bad.length) await o.boss.fail(o.queue, bad.map((f) => f.id));
          } catch (err) {
            // The queue's database is away: keep the outcomes and record them when it is back
            // (a failed job must be failed to be retried soon; pg-boss would otherwise wait for
            // it to expire). A bounded memory: past the bound, the oldest are left to expiry.
            completed.unshift(...done);
            failed.unshift(...bad);
            if (completed.length > MAX_UNRECORDED) completed.splice(0, completed.length - MAX_UNRECORDED);
            if (failed.length > MAX_UNRECORDED) failed.splice(0, failed.length - MAX_UNRECORDED);
            o.logger.warn({ queue: o.queue, jobs: completed.length + failed.length, err: describe(err) }, 'could not record job outcomes yet; trying again');
            scheduleFlush(RETRY_FLUSH_MS);
            return;
          }
        }
      } finally {
        flushing = null;
      }
    })());
  function scheduleFlush(delayMs = 50): void {
    if (flushTimer || stopped) return;
    flushTimer = setTimeout(() => {
      flushTimer = null;
      void flush();
    }, delayMs);
  }

  const loop = (async () => {
    while (!stopping) {
      const free = o.concurrency - running.size;
      if (free <= 0) {
        await pause(o.pollMs);
        continue;
      }
      let jobs: PgBoss.JobWithMetadata<T>[] = [];
      woken = false;
      try {
        jobs = await o.boss.fetch<T>(o.queue, { batchSize: Math.min(free, o.batchSize), includeMetadata: true });
      } catch (err) {
        o.logger.warn({ queue: o.queue, err: describe(err) }, 'could not fetch jobs; trying again');
      }
      if (jobs.length === 0) {
        await pause(o.pollMs);
        continue;
      }
      let started: Promise<unknown>[];
      try {
        started = o.run(jobs);
      } catch (err) {
        started = jobs.map(() => Promise.reject(err));
      }
      jobs.forEach((job, i) => {
        const p: Promise<unknown> = (started[i] ?? Promise.resolve())
          .then(
            () => void completed.push(job.id),
            (err) => {
              o.logger.warn({ queue: o.queue, err: describe(err) }, 'job failed; it will be retried');
              failed.push({ id: job.id, message: describe(err).message });
            },
          )
          .finally(() => {
            running.delete(p);
            scheduleFlush();
            try {
              o.onSettled?.();
            } catch {
              // onSettled must not throw; nothing of it may escape either
            }
            wake();
          });
        running.add(p);
      });
    }
  })().catch((err) => o.logger.error({ queue: o.queue, err: describe(err) }, 'worker loop stopped'));

  return {
    wake,
    stop: async (graceMs) => {
      stopping = true;
      wake();
      await loop;
      let timer: NodeJS.Timeout | undefined;
      await Promise.race([Promise.allSettled([...running]), new Promise((r) => (timer = setTimeout(r, graceMs)))]);
      clearTimeout(timer);
      if (flushTimer) clearTimeout(flushTimer);
      flushTimer = null;
      await flushing;
      await flush();
      stopped = true;
      if (flushTimer) clearTimeout(flushTimer);
      flushTimer = null;
    },
  };
}
