// The errors that mean "the database is not reachable right now" answer 503 with Retry-After, not
// 500: among them pg's own refusals of a client whose connection broke or was closed before the
// query was sent (seen in faults-combined.test.ts during a database restart). The errors here are
// pg's real ones: a client against a port nothing listens on, a client whose server process is
// terminated, a client that was closed.
import { createServer } from 'node:net';
import pg from 'pg';
import { describe, expect, it } from 'vitest';
import { isDatabaseUnavailable, toProblem } from '../../server/http/problem';

async function closedPort(): Promise<number> {
  const srv = createServer();
  await new Promise<void>((r) => srv.listen(0, '127.0.0.1', r));
  const port = (srv.address() as { port: number }).port;
  await new Promise<void>((r) => srv.close(() => r()));
  return port;
}

describe('a database that is not reachable', () => {
  it("is what pg's refusals say: connection refused, a client whose connection broke, a closed client", async () => {
    const nowhere = new pg.Client({ host: '127.0.0.1', port: await closedPort(), user: 'nobody', database: 'none' });
    expect(isDatabaseUnavailable(await nowhere.connect().then(() => null, (e: unknown) => e))).toBe(true);

    // A client whose server process is terminated (as in a restart): its next query is refused by pg itself.
    const client = new pg.Client({ connectionString: process.env.DATABASE_URL });
    client.on('error', () => {});
    await client.connect();
    const pid = (await client.query<{ pid: number }>('SELECT pg_backend_pid() AS pid')).rows[0]!.pid;
    const other = new pg.Client({ connectionString: process.env.DATABASE_URL });
    await other.connect();
    await other.query('SELECT pg_terminate_backend($1)', [pid]);
    await other.end();
    await new Promise((r) => setTimeout(r, 200));
    const broken = await client.query('SELECT 1').then(() => null, (e: unknown) => e);
    expect((broken as Error).message).toBe('Client has encountered a connection error and is not queryable');
    expect(isDatabaseUnavailable(broken)).toBe(true);
    const { problem, headers, unexpected } = toProblem(broken);
    expect([problem.status, headers['Retry-After'], unexpected]).toEqual([503, '5', false]);
    await client.end().catch(() => {});

    const closed = new pg.Client({ connectionString: process.env.DATABASE_URL });
    await closed.connect();
    await closed.end();
    const afterEnd = await closed.query('SELECT 1').then(() => null, (e: unknown) => e);
    expect((afterEnd as Error).message).toBe('Client was closed and is not queryable');
    expect(isDatabaseUnavailable(afterEnd)).toBe(true);
  });

  it('is not any other error', () => {
    expect(isDatabaseUnavailable(new Error('duplicate key value violates unique constraint'))).toBe(false);
    expect(toProblem(new Error('boom')).problem.status).toBe(500);
  });
});
