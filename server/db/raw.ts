// Hot-path queries straight on node-postgres, beside Sequelize: a named (prepared) statement on a
// connection borrowed from Sequelize's own pool, rows as plain objects. Each connection parses a
// named statement once and then only binds and executes it, and no model instances are built.
// Persistence only; the models stay for everything else.
import type { Sequelize } from 'sequelize';
import { perKeyBatches } from './per-key-batches';

interface PgClient {
  query(q: { name: string; text: string; values: unknown[] }): Promise<{ rows: Record<string, unknown>[] }>;
}
interface ConnectionManager {
  getConnection(): Promise<PgClient>;
  releaseConnection(c: PgClient): Promise<void>;
}

/** Runs a named prepared statement; `name` must always go with the same `text`. */
export async function preparedRows<T>(sequelize: Sequelize, name: string, text: string, values: unknown[]): Promise<T[]> {
  const cm = sequelize.connectionManager as unknown as ConnectionManager;
  const conn = await cm.getConnection();
  try {
    return (await conn.query({ name, text, values })).rows as T[];
  } finally {
    await cm.releaseConnection(conn);
  }
}

/**
 * Coalesces reads of the same key: at most one query per key in flight per process, and a caller
 * that arrives while one is in flight waits for the next one, never for one sent before it
 * arrived — so every caller still sees every commit made before it asked (a revoked key is
 * refused on the very next request), but a burst of requests for one key costs one round trip
 * per query time instead of one per request.
 */
export function freshReads<T>(load: (key: string) => Promise<T>): (key: string) => Promise<T> {
  return perKeyBatches(async (key) => {
    const v = await load(key);
    return () => v;
  });
}
