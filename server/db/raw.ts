// Hot-path queries straight on node-postgres, beside Sequelize: a named (prepared) statement on a
// connection borrowed from Sequelize's own pool, rows as plain objects. Each connection parses a
// named statement once and then only binds and executes it, and no model instances are built.
// Persistence only; the models stay for everything else.
import type { Sequelize } from 'sequelize';

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
