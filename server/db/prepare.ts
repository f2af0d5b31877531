// Getting the database ready before a server (or the CLI) uses it: migrations, the job queue's
// schema and the app role's rights, all done as the role that owns the tables.
//
// With LOTPROOF_MIGRATION_DATABASE_URL (the embedded cluster and the test clusters always set up two
// roles), the owner migrates, installs pg-boss's schema and grants the role of DATABASE_URL exactly
// what the server needs (privileges.ts). Without it, migrations run on DATABASE_URL as before, and a
// warning says the app connects as the owner of its tables — unless the role there owns nothing and
// nothing is pending (migrations were run by the operator as the owner).
import { readdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import PgBoss from 'pg-boss';
import type { Logger } from 'pino';
import { QueryTypes, Sequelize } from 'sequelize';
import { migrate } from './migrate';
import { grantAppPrivileges, JOB_SCHEMA } from './privileges';

const migrationsDir = join(dirname(fileURLToPath(import.meta.url)), '..', 'migrations');

/**
 * A small connection of its own, without the models: openDatabase would bind every model to it, and
 * this one is closed once the database is prepared.
 */
function bareConnection(url: string): { sequelize: Sequelize; close: () => Promise<void> } {
  const sequelize = new Sequelize(url, {
    dialect: 'postgres',
    logging: false,
    pool: { max: 2, min: 0, acquire: 10_000, idle: 10_000 },
    dialectOptions: { connectionTimeoutMillis: 3_000, application_name: 'lotproof-migrate' },
    define: { underscored: true, timestamps: false },
  });
  return { sequelize, close: () => sequelize.close() };
}

/** The role a connection string logs in as. */
export function roleOf(url: string): string {
  return decodeURIComponent(new URL(url).username);
}

/** True when some migration has not been applied (read without DDL, so any role may ask). */
async function migrationsPending(sequelize: Sequelize): Promise<boolean> {
  const files = readdirSync(migrationsDir).filter((f) => /^\d{4}-.+\.ts$/.test(f)).map((f) => f.replace(/\.ts$/, ''));
  const [exists] = await sequelize.query<{ t: string | null }>("SELECT to_regclass('public.schema_migrations')::text AS t", { type: QueryTypes.SELECT });
  if (!exists?.t) return true;
  const done = new Set((await sequelize.query<{ name: string }>('SELECT name FROM schema_migrations', { type: QueryTypes.SELECT })).map((r) => r.name));
  return files.some((f) => !done.has(f));
}

/** Installs (or upgrades) pg-boss's schema as the connecting role, so the app's role needs no DDL for it. */
async function installJobSchema(url: string, logger?: Logger): Promise<void> {
  const boss = new PgBoss({ connectionString: url, schema: JOB_SCHEMA, max: 1, supervise: false, schedule: false, application_name: 'lotproof-migrate' });
  boss.on('error', (err) => logger?.warn({ err: { message: String((err as Error)?.message ?? err).slice(0, 300) } }, 'job schema install: error'));
  await boss.start();
  await boss.stop({ graceful: false, wait: true, timeout: 1_000 });
}

export interface Preparation {
  /** The app's role owns the tables (no separate migration role): it could alter them. */
  appOwnsTables: boolean;
}

/**
 * Migrates and sets the app role's rights (see above). Logs the warning when the app's own
 * connection is the tables' owner.
 */
export async function prepareDatabase(
  config: { databaseUrl: string; migrationDatabaseUrl: string | null },
  logger?: Logger,
): Promise<Preparation> {
  const log = (m: string) => logger?.debug(m);
  if (config.migrationDatabaseUrl && roleOf(config.migrationDatabaseUrl) !== roleOf(config.databaseUrl)) {
    const owner = bareConnection(config.migrationDatabaseUrl);
    try {
      await migrate(owner.sequelize, log);
      await installJobSchema(config.migrationDatabaseUrl, logger);
      await grantAppPrivileges(owner.sequelize, roleOf(config.databaseUrl));
    } finally {
      await owner.close();
    }
    return { appOwnsTables: false };
  }
  const db = bareConnection(config.databaseUrl);
  try {
    const [own] = await db.sequelize.query<{ owns: boolean }>(
      `SELECT COALESCE((SELECT pg_has_role(current_user, c.relowner, 'USAGE') FROM pg_class c WHERE c.oid = to_regclass('public.verdicts')), true) AS owns`,
      { type: QueryTypes.SELECT },
    );
    const appOwnsTables = own!.owns;
    if (appOwnsTables || (await migrationsPending(db.sequelize))) await migrate(db.sequelize, log);
    if (appOwnsTables) {
      logger?.warn(
        'the server connects to PostgreSQL as the owner of its tables (DATABASE_URL), so it could alter them or switch the ledger\'s append-only triggers off; ' +
          'run migrations as the owner with LOTPROOF_MIGRATION_DATABASE_URL and give DATABASE_URL a role with only the app\'s rights (README, "Least privilege in PostgreSQL")',
      );
    }
    return { appOwnsTables };
  } finally {
    await db.close();
  }
}
