// The aside thread (server/core/aside-thread.ts): a task runs on one worker thread, started by the
// first task; typed arrays move there and back without a copy; a task's error is the caller's; a
// thread that dies with a task in hand fails that task with Unavailable (a 503), and the next task
// starts a new thread.
import { isMainThread, threadId } from 'node:worker_threads';
import { afterAll, describe, expect, it } from 'vitest';
import { runAside, stopAsideThread } from '../../server/core/aside-thread';
import { Unavailable } from '../../server/core/errors';
import { doubled, endsThread, fails, whereAmI } from '../support/aside-fixture-tasks';

afterAll(() => stopAsideThread());

describe('the aside thread', () => {
  it('runs a task on a worker thread, the same one each time', async () => {
    expect(isMainThread).toBe(true);
    const a = await runAside(whereAmI, null);
    const b = await runAside(whereAmI, null);
    expect(a.isMainThread).toBe(false);
    expect(a.threadId).not.toBe(threadId);
    expect(b.threadId).toBe(a.threadId);
  }, 60_000);

  it('moves a typed array there (unusable here afterwards) and back', async () => {
    const values = Float64Array.from([0.5, 1, 497.25]);
    const back = await runAside(doubled, { values }, [values.buffer as ArrayBuffer]);
    expect(values.length, 'the buffer left this thread').toBe(0);
    expect(back.isMainThread).toBe(false);
    expect(Array.from(back.values)).toEqual([1, 2, 994.5]);
  }, 60_000);

  it("gives a task's error to its caller, and keeps serving", async () => {
    await expect(runAside(fails, { message: 'no such rulebook' })).rejects.toThrow(/no such rulebook/);
    expect((await runAside(whereAmI, null)).isMainThread).toBe(false);
  }, 60_000);

  it('fails the task in hand with Unavailable when the thread dies, and starts a new thread for the next', async () => {
    const before = await runAside(whereAmI, null);
    const err = await runAside(endsThread, null).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(Unavailable);
    const after = await runAside(whereAmI, null);
    expect(after.isMainThread).toBe(false);
    expect(after.threadId).not.toBe(before.threadId);
  }, 60_000);
});
