// Tasks for tests/unit/aside-thread.test.ts: where a task runs, a buffer moved there and back, a
// task that throws, and one that ends the thread it runs on.
import { isMainThread, threadId } from 'node:worker_threads';
import { asideTask } from '../../server/core/aside-thread';

export const whereAmI = asideTask(import.meta.url, 'whereAmI', (_: null) => ({ value: { isMainThread, threadId } }));

/** Doubles every value, in place, and sends the same buffer back. */
export const doubled = asideTask(import.meta.url, 'doubled', ({ values }: { values: Float64Array }) => {
  for (let i = 0; i < values.length; i++) values[i]! *= 2;
  return { value: { values, isMainThread }, transfer: [values.buffer as ArrayBuffer] };
});

export const fails = asideTask(import.meta.url, 'fails', ({ message }: { message: string }) => {
  throw new Error(message);
});

/** Ends the thread while the task is in hand (as a crash of the worker would). */
export const endsThread = asideTask(import.meta.url, 'endsThread', (_: null) => {
  if (!isMainThread) process.exit(3);
  return { value: 'ran on the main thread' };
});
