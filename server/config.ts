// Configuration, read from the environment and validated once at start-up into one typed object.
// Nothing else in the server reads process.env.
import { resolve } from 'node:path';

export interface Config {
  /** Interface and port the HTTP server listens on. */
  host: string;
  port: number;
  /** PostgreSQL connection string; null means "start the embedded local cluster". */
  databaseUrl: string | null;
  /** Port of the embedded cluster (only used when databaseUrl is null). */
  embeddedPgPort: number;
  /** Folder for local state: the embedded cluster, the signing key, demo credentials. */
  dataDir: string;
  /** Largest accepted request body, in bytes (JSON and CSV). */
  bodyLimitBytes: number;
  /** Public base URL used in links (e-mails, docs "servers"). */
  publicUrl: string;
  logLevel: string;
  /** Seed the invented demo packer on start. */
  seedDemo: boolean;
  /** True in development and tests: development-only pages (e.g. the captured mailbox) are on. */
  development: boolean;
  /** Check every response against the OpenAPI document too (on in tests). */
  validateResponses: boolean;
}

export class ConfigError extends Error {}

function int(env: NodeJS.ProcessEnv, name: string, fallback: number, min: number, max: number): number {
  const raw = env[name];
  if (raw === undefined || raw === '') return fallback;
  const value = Number(raw);
  if (!Number.isInteger(value) || value < min || value > max) {
    throw new ConfigError(`${name} must be an integer from ${min} to ${max}; got "${raw}"`);
  }
  return value;
}

function bool(env: NodeJS.ProcessEnv, name: string, fallback: boolean): boolean {
  const raw = env[name];
  if (raw === undefined || raw === '') return fallback;
  if (['1', 'true', 'yes'].includes(raw.toLowerCase())) return true;
  if (['0', 'false', 'no'].includes(raw.toLowerCase())) return false;
  throw new ConfigError(`${name} must be true or false; got "${raw}"`);
}

export const DEFAULT_PORT = 4780;

export function loadConfig(env: NodeJS.ProcessEnv = process.env): Config {
  const host = env.HOST || '127.0.0.1';
  const port = int(env, 'PORT', DEFAULT_PORT, 0, 65535);
  const databaseUrl = env.DATABASE_URL || null;
  if (databaseUrl && !/^postgres(ql)?:\/\//.test(databaseUrl)) {
    throw new ConfigError('DATABASE_URL must be a postgres:// connection string');
  }
  const development = (env.NODE_ENV ?? 'development') !== 'production';
  return {
    host,
    port,
    databaseUrl,
    embeddedPgPort: int(env, 'LOTPROOF_PG_PORT', 54780, 1024, 65535),
    dataDir: resolve(env.LOTPROOF_DATA_DIR || '.data'),
    bodyLimitBytes: int(env, 'LOTPROOF_BODY_LIMIT_MB', 40, 1, 1024) * 1024 * 1024,
    publicUrl: (env.LOTPROOF_PUBLIC_URL || `http://${host}:${port}`).replace(/\/$/, ''),
    logLevel: env.LOG_LEVEL || (development ? 'info' : 'info'),
    seedDemo: bool(env, 'LOTPROOF_SEED_DEMO', databaseUrl === null),
    development,
    validateResponses: bool(env, 'LOTPROOF_VALIDATE_RESPONSES', false),
  };
}
