// The Sequelize instance and its connection pool. Persistence only: no business rules here.
import { Sequelize } from 'sequelize';
import type { Logger } from 'pino';
import { initModels } from '../models';

export interface Database {
  sequelize: Sequelize;
  /** Cheap reachability check for /readyz; rejects when the database cannot be reached. */
  ping: (timeoutMs?: number) => Promise<void>;
  close: () => Promise<void>;
}

const closeHooks = new Set<() => Promise<void>>();

/** Work to finish before any pool closes (e.g. counters gathered in memory are written out). */
export function onDatabaseClose(hook: () => Promise<void>): void {
  closeHooks.add(hook);
}

/**
 * A statement as the trace log shows it: Sequelize writes the values of the statements it builds
 * into their text ('…', E'…', numbers), so each literal is replaced by `?`; statements with bind
 * parameters ($1) never carry their values here (logQueryParameters stays off). Own code: a few
 * regular expressions; no package the project uses masks SQL literals.
 */
export function statementWithoutValues(sql: string): string {
  return sql
    .replace(/\bE'(?:[^'\\]|\\.|'')*'/g, '?')
    .replace(/'(?:[^']|'')*(?:'|$)/g, '?')
    .replace(/(?<![\w$."])[-+]?\d+(?:\.\d+)?(?:e[-+]?\d+)?\b/gi, '?');
}

export function openDatabase(url: string, logger?: Logger, poolMax = 20): Database {
  const sequelize = new Sequelize(url, {
    dialect: 'postgres',
    // At trace level only, and without the values (see statementWithoutValues).
    logging: logger ? (sql: string) => void (logger.isLevelEnabled('trace') && logger.trace({ sql: statementWithoutValues(sql).slice(0, 500) }, 'sql')) : false,
    pool: { max: poolMax, min: 0, acquire: 10_000, idle: 10_000 },
    dialectOptions: { connectionTimeoutMillis: 3_000, application_name: 'lotproof' },
    define: { underscored: true, timestamps: false },
  });
  initModels(sequelize);
  return {
    sequelize,
    ping: async (timeoutMs = 2_000) => {
      let timer: NodeJS.Timeout | undefined;
      const timeout = new Promise<never>((_, rej) => {
        timer = setTimeout(() => rej(new Error('database ping timed out')), timeoutMs);
      });
      try {
        await Promise.race([sequelize.query('SELECT 1'), timeout]);
      } finally {
        clearTimeout(timer);
      }
    },
    close: async () => {
      for (const hook of closeHooks) await hook().catch(() => {});
      await sequelize.close();
    },
  };
}
