// Schema migrations with umzug, recorded in the table `schema_migrations`. Run at start and in tests.
// Files: server/migrations/NNNN-what.ts exporting `up` (and `down`) that take the QueryInterface.
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { readdirSync } from 'node:fs';
import type { QueryInterface, Sequelize } from 'sequelize';
import { SequelizeStorage, Umzug } from 'umzug';

const migrationsDir = join(dirname(fileURLToPath(import.meta.url)), '..', 'migrations');

export type Migration = (ctx: { context: QueryInterface }) => Promise<void>;

export function migrator(sequelize: Sequelize, log: (msg: string) => void = () => {}) {
  const files = readdirSync(migrationsDir).filter((f) => /^\d{4}-.+\.ts$/.test(f)).sort();
  return new Umzug<QueryInterface>({
    migrations: files.map((file) => ({
      name: file.replace(/\.ts$/, ''),
      up: async (params) => (await import(join(migrationsDir, file))).up(params),
      down: async (params) => (await import(join(migrationsDir, file))).down?.(params),
    })),
    context: sequelize.getQueryInterface(),
    storage: new SequelizeStorage({ sequelize, tableName: 'schema_migrations' }),
    logger: { info: (m) => log(`migration ${JSON.stringify(m)}`), warn: () => {}, error: () => {}, debug: () => {} },
  });
}

/** Applies every pending migration; serialised across processes with an advisory lock. */
export async function migrate(sequelize: Sequelize, log?: (msg: string) => void): Promise<void> {
  const lockId = 781_0001;
  await sequelize.query('SELECT pg_advisory_lock(:id)', { replacements: { id: lockId } });
  try {
    await migrator(sequelize, log).up();
  } finally {
    await sequelize.query('SELECT pg_advisory_unlock(:id)', { replacements: { id: lockId } });
  }
}
