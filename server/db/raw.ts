// Hot-path queries straight on node-postgres, beside Sequelize: a connection borrowed from
// Sequelize's own pool, named (prepared) statements, rows as plain objects. Each connection parses
// a named statement once and then only binds and executes it, and no model instances are built.
// Persistence only. The one declaration of the raw client's types is here.
import type { Sequelize } from 'sequelize';
import { perKeyBatches } from './per-key-batches.speedup';

/** A query's result as node-postgres gives it. */
export interface PgResult {
  command: string;
  rows: Record<string, unknown>[];
}

/** The node-postgres client behind a Sequelize connection (what the connection manager hands out). */
export interface PgClient {
  /** A simple-protocol text (several statements allowed: one result each), or an extended-protocol query. */
  query(text: string | { name?: string; text: string; values: unknown[] }, values?: unknown[]): Promise<PgResult | PgResult[]>;
  escapeLiteral(s: string): string;
}

interface ConnectionManager {
  getConnection(): Promise<PgClient>;
  releaseConnection(c: PgClient): Promise<void>;
}

/** Runs `work` on a connection of Sequelize's pool, and gives the connection back afterwards. */
export async function withConnection<T>(sequelize: Sequelize, work: (conn: PgClient) => Promise<T>): Promise<T> {
  const cm = sequelize.connectionManager as unknown as ConnectionManager;
  const conn = await cm.getConnection();
  try {
    return await work(conn);
  } finally {
    await cm.releaseConnection(conn);
  }
}

/** Runs a named prepared statement; `name` must always go with the same `text`. */
export function preparedRows<T>(sequelize: Sequelize, name: string, text: string, values: unknown[]): Promise<T[]> {
  return withConnection(sequelize, async (conn) => ((await conn.query({ name, text, values })) as PgResult).rows as T[]);
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
