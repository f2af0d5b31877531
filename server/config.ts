// Configuration, read from the environment and validated once at start-up into one typed object.
// Nothing else in the server reads process.env.
import { isIP } from 'node:net';
import { resolve } from 'node:path';

export interface Config {
  /** Interface and port the HTTP server listens on. */
  host: string;
  port: number;
  /** PostgreSQL connection string; null means "start the embedded local cluster". */
  databaseUrl: string | null;
  /**
   * Connection for migrations, as the role that owns the tables (LOTPROOF_MIGRATION_DATABASE_URL);
   * null: migrations run on databaseUrl, whose role then owns the tables (server/db/prepare.ts).
   */
  migrationDatabaseUrl: string | null;
  /** Port of the embedded cluster (only used when databaseUrl is null). */
  embeddedPgPort: number;
  /** API processes `npm start` runs on the one port (node:cluster); 1 serves from the start process itself. */
  processes: number;
  /** Folder for local state: the embedded cluster, the signing and secrets keys, demo credentials. */
  dataDir: string;
  /** AES-256 key for secrets stored encrypted (LOTPROOF_SECRETS_KEY); null: <dataDir>/secrets-key. */
  secretsKey: Buffer | null;
  /** Keys before it (LOTPROOF_SECRETS_KEY_PREVIOUS, comma-separated): they still open, never seal. */
  secretsKeysPrevious: Buffer[];
  /** Largest accepted request body, in bytes (JSON and CSV): the limit of the operations that take lots (server/http/request-body.ts). */
  bodyLimitBytes: number;
  /** Largest body of every other operation (anonymous, identity, products, webhooks), in bytes; at most bodyLimitBytes. */
  smallBodyLimitBytes: number;
  /** The HTTP server's own limits against slow and many clients. */
  http: HttpServerConfig;
  /** Public base URL used in links (e-mails, docs "servers"). */
  publicUrl: string;
  /**
   * Express's `trust proxy`: which hops may set X-Forwarded-For (and so the client IP that rate
   * limits and logs see). true/false, a number of hops, or addresses, subnets and the names
   * `loopback`, `linklocal`, `uniquelocal`.
   */
  trustProxy: TrustProxy;
  logLevel: string;
  /** Seed the invented demo packer on start. */
  seedDemo: boolean;
  /**
   * Development mode, only when asked for (see developmentMode): the captured mailbox (to loopback
   * clients of a server listening on loopback), the local SMTP fake, webhooks to private addresses.
   */
  development: boolean;
  /** Check every response against the OpenAPI document too (on in tests). */
  validateResponses: boolean;
  /** Outgoing e-mail (invitations, password resets). */
  smtp: SmtpConfig;
  /** Console sessions and the one-time links sent by e-mail. */
  sessions: SessionConfig;
  /** Request and sign-in limits, shared by every process through PostgreSQL. */
  rateLimits: RateLimitConfig;
  /** Verdict sealing, the ledger and notifications. */
  verdicts: VerdictConfig;
}

export interface HttpServerConfig {
  /** Time for a request's line and headers to arrive, from its first byte (LOTPROOF_HEADERS_TIMEOUT_MS). */
  headersTimeoutMs: number;
  /**
   * The slowest upload accepted, in bytes per second (LOTPROOF_MIN_BODY_RATE_KB): a request must
   * arrive within the headers timeout plus its operation's body limit at this rate.
   */
  minBodyBytesPerSecond: number;
  /** How long an idle keep-alive connection stays open (LOTPROOF_KEEP_ALIVE_TIMEOUT_MS). */
  keepAliveTimeoutMs: number;
  /** Open connections one process accepts; beyond them a new connection is closed at once (LOTPROOF_MAX_CONNECTIONS). */
  maxConnections: number;
}

export interface VerdictConfig {
  /** Ed25519 private key (PKCS#8 PEM) for seals; null means "use or create <dataDir>/signing-key.pem". */
  signingKeyPem: string | null;
  /** Most verdicts one group commit appends to the ledger in one transaction. */
  ledgerBatchMax: number;
  /** Seconds between rounds of scheduled checkpoints (each organisation whose chain grew gets one). */
  checkpointIntervalSeconds: number;
  /** Run the job workers (webhook delivery, alert e-mail) in this process. */
  runJobs: boolean;
  /** Attempts per webhook delivery before it is marked failed; retries back off exponentially. */
  webhookRetryLimit: number;
  /** First retry delay in seconds (doubled per attempt by the queue). */
  webhookRetryDelaySeconds: number;
  /** Time allowed for a receiver to answer, in milliseconds. */
  webhookTimeoutMs: number;
  /** Allow webhook URLs on loopback and private networks (development and tests). */
  webhookAllowPrivateTargets: boolean;
}

export interface SmtpConfig {
  host: string;
  port: number;
  /** TLS from the first byte (port 465 style); otherwise STARTTLS when the server offers it. */
  secure: boolean;
  user: string | null;
  password: string | null;
  from: string;
  /** Start the local capturing SMTP fake on host:port (development only; never in production). */
  fake: boolean;
}

export interface SessionConfig {
  ttlHours: number;
  /** A session unused for this long has ended (an idle timeout besides the absolute lifetime). */
  idleMinutes: number;
  invitationTtlHours: number;
  passwordResetTtlMinutes: number;
}

export interface RateLimitConfig {
  /** Requests per minute per API key (or per console session). */
  perKeyPerMinute: number;
  /** Requests per minute per organisation, all its keys and sessions together. */
  perOrganisationPerMinute: number;
  /** Requests per minute per client IP without a valid credential. */
  perIpPerMinute: number;
  /** Failed sign-ins per account per 15 minutes before sign-in is refused for it. */
  signInFailuresPerAccount: number;
  /** Failed sign-ins per client IP per 15 minutes. */
  signInFailuresPerIp: number;
}

export class ConfigError extends Error {}

export type TrustProxy = boolean | number | string[];

const PROXY_PRESETS = ['loopback', 'linklocal', 'uniquelocal'];

/** One entry of a trust list: a preset name, an address, or an address with a prefix length (or an IPv4 netmask). */
function validProxyEntry(entry: string): boolean {
  if (PROXY_PRESETS.includes(entry)) return true;
  const slash = entry.indexOf('/');
  if (slash === -1) return isIP(entry) !== 0;
  const [addr, range] = [entry.slice(0, slash), entry.slice(slash + 1)];
  const family = isIP(addr);
  if (family === 0) return false;
  if (/^\d{1,3}$/.test(range)) return Number(range) <= (family === 4 ? 32 : 128);
  // An IPv4 netmask: contiguous ones, then zeros.
  if (family !== 4 || isIP(range) !== 4) return false;
  const bits = range.split('.').map((o) => Number(o).toString(2).padStart(8, '0')).join('');
  return /^1*0*$/.test(bits);
}

/** LOTPROOF_TRUST_PROXY as Express's `trust proxy` setting accepts it; unset means `loopback`. */
export function parseTrustProxy(raw: string | undefined): TrustProxy {
  const name = 'LOTPROOF_TRUST_PROXY';
  const v = (raw ?? '').trim();
  if (v === '') return ['loopback'];
  if (/^(true|false)$/i.test(v)) return v.toLowerCase() === 'true';
  if (/^\d+$/.test(v)) {
    const hops = Number(v);
    if (hops > 100) throw new ConfigError(`${name} must be a number of hops from 0 to 100; got "${raw}"`);
    return hops;
  }
  const entries = v.split(',').map((e) => e.trim());
  const bad = entries.filter((e) => !validProxyEntry(e));
  if (bad.length > 0) {
    throw new ConfigError(
      `${name} must be true, false, a number of hops, or a comma-separated list of addresses, subnets (a.b.c.d/n) and ` +
        `${PROXY_PRESETS.join(', ')}; not ${bad.map((b) => JSON.stringify(b)).join(', ')}`,
    );
  }
  return entries;
}

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

/** A secrets key from its base64 text (an environment variable or a key file, named by `where`). */
export function decodeSecretsKey(text: string, where: string): Buffer {
  const key = Buffer.from(text.trim(), 'base64');
  if (key.length !== 32) throw new ConfigError(`${where} must hold 32 bytes, base64-encoded (e.g. openssl rand -base64 32)`);
  return key;
}

function secretsKeyOf(raw: string | undefined, name: string): Buffer | null {
  return raw ? decodeSecretsKey(raw, name) : null;
}

/** How to turn development mode on, for messages that say it is off. */
export const DEVELOPMENT_MODE_HOW = 'start the server with `npm run dev` (or set LOTPROOF_DEV=1, or NODE_ENV=development)';

/**
 * Development mode is asked for, never assumed: LOTPROOF_DEV (1/true or 0/false) decides when set;
 * otherwise `--dev` on the command line (`npm run dev`) or NODE_ENV=development or test turns it on.
 * Anything else — an unset NODE_ENV included — is production behaviour.
 */
export function developmentMode(env: NodeJS.ProcessEnv, argv: readonly string[]): boolean {
  const asked = env.LOTPROOF_DEV === undefined || env.LOTPROOF_DEV === '' ? null : bool(env, 'LOTPROOF_DEV', false);
  const flag = argv.includes('--dev');
  if (env.NODE_ENV === 'production' && (asked === true || flag)) {
    throw new ConfigError(`NODE_ENV=production contradicts ${asked ? 'LOTPROOF_DEV' : '--dev'}: development mode is for a local trial, never production`);
  }
  if (asked !== null) return asked;
  return flag || env.NODE_ENV === 'development' || env.NODE_ENV === 'test';
}

export function loadConfig(env: NodeJS.ProcessEnv = process.env, argv: readonly string[] = process.argv.slice(2)): Config {
  const host = env.HOST || '127.0.0.1';
  const port = int(env, 'PORT', DEFAULT_PORT, 0, 65535);
  const databaseUrl = env.DATABASE_URL || null;
  if (databaseUrl && !/^postgres(ql)?:\/\//.test(databaseUrl)) {
    throw new ConfigError('DATABASE_URL must be a postgres:// connection string');
  }
  const migrationDatabaseUrl = env.LOTPROOF_MIGRATION_DATABASE_URL || null;
  if (migrationDatabaseUrl && !/^postgres(ql)?:\/\//.test(migrationDatabaseUrl)) {
    throw new ConfigError('LOTPROOF_MIGRATION_DATABASE_URL must be a postgres:// connection string');
  }
  if (migrationDatabaseUrl && !databaseUrl) {
    throw new ConfigError('LOTPROOF_MIGRATION_DATABASE_URL is set without DATABASE_URL: set both (the embedded cluster sets up its own roles)');
  }
  const development = developmentMode(env, argv);
  return {
    host,
    port,
    databaseUrl,
    migrationDatabaseUrl,
    embeddedPgPort: int(env, 'LOTPROOF_PG_PORT', 25480, 1024, 65535),
    processes: int(env, 'LOTPROOF_PROCESSES', 1, 1, 64),
    dataDir: resolve(env.LOTPROOF_DATA_DIR || '.data'),
    secretsKey: secretsKeyOf(env.LOTPROOF_SECRETS_KEY, 'LOTPROOF_SECRETS_KEY'),
    secretsKeysPrevious: (env.LOTPROOF_SECRETS_KEY_PREVIOUS ?? '').split(',').filter((k) => k.trim()).map((k) => secretsKeyOf(k, 'LOTPROOF_SECRETS_KEY_PREVIOUS')!),
    bodyLimitBytes: int(env, 'LOTPROOF_BODY_LIMIT_MB', 40, 1, 1024) * 1024 * 1024,
    smallBodyLimitBytes: Math.min(int(env, 'LOTPROOF_SMALL_BODY_LIMIT_KB', 64, 1, 1024 * 1024), int(env, 'LOTPROOF_BODY_LIMIT_MB', 40, 1, 1024) * 1024) * 1024,
    http: {
      headersTimeoutMs: int(env, 'LOTPROOF_HEADERS_TIMEOUT_MS', 10_000, 100, 600_000),
      minBodyBytesPerSecond: int(env, 'LOTPROOF_MIN_BODY_RATE_KB', 512, 1, 1024 * 1024) * 1024,
      keepAliveTimeoutMs: int(env, 'LOTPROOF_KEEP_ALIVE_TIMEOUT_MS', 5_000, 100, 600_000),
      maxConnections: int(env, 'LOTPROOF_MAX_CONNECTIONS', 1000, 1, 1_000_000),
    },
    publicUrl: (env.LOTPROOF_PUBLIC_URL || `http://${host}:${port}`).replace(/\/$/, ''),
    trustProxy: parseTrustProxy(env.LOTPROOF_TRUST_PROXY),
    logLevel: env.LOG_LEVEL || (development ? 'info' : 'info'),
    seedDemo: bool(env, 'LOTPROOF_SEED_DEMO', databaseUrl === null),
    development,
    validateResponses: bool(env, 'LOTPROOF_VALIDATE_RESPONSES', false),
    smtp: {
      host: env.SMTP_HOST || '127.0.0.1',
      port: int(env, 'SMTP_PORT', 4725, 0, 65535),
      secure: bool(env, 'SMTP_SECURE', false),
      user: env.SMTP_USER || null,
      password: env.SMTP_PASSWORD || null,
      from: env.SMTP_FROM || 'Lotproof <no-reply@lotproof.localhost>',
      fake: development && bool(env, 'LOTPROOF_SMTP_FAKE', !env.SMTP_HOST),
    },
    sessions: {
      ttlHours: int(env, 'LOTPROOF_SESSION_TTL_HOURS', 12, 1, 24 * 30),
      idleMinutes: int(env, 'LOTPROOF_SESSION_IDLE_MINUTES', 30, 1, 24 * 60),
      invitationTtlHours: int(env, 'LOTPROOF_INVITATION_TTL_HOURS', 168, 1, 24 * 30),
      passwordResetTtlMinutes: int(env, 'LOTPROOF_PASSWORD_RESET_TTL_MINUTES', 60, 5, 24 * 60),
    },
    rateLimits: {
      perKeyPerMinute: int(env, 'LOTPROOF_RATE_LIMIT_PER_KEY', 3000, 1, 10_000_000),
      perOrganisationPerMinute: int(env, 'LOTPROOF_RATE_LIMIT_PER_ORG', 12000, 1, 10_000_000),
      perIpPerMinute: int(env, 'LOTPROOF_RATE_LIMIT_PER_IP', 3000, 1, 10_000_000),
      signInFailuresPerAccount: int(env, 'LOTPROOF_SIGNIN_FAILURES_PER_ACCOUNT', 10, 1, 10_000),
      signInFailuresPerIp: int(env, 'LOTPROOF_SIGNIN_FAILURES_PER_IP', 100, 1, 100_000),
    },
    verdicts: {
      signingKeyPem: env.LOTPROOF_SIGNING_KEY ? env.LOTPROOF_SIGNING_KEY.replace(/\\n/g, '\n') : null,
      ledgerBatchMax: int(env, 'LOTPROOF_LEDGER_BATCH_MAX', 256, 1, 5000),
      checkpointIntervalSeconds: int(env, 'LOTPROOF_CHECKPOINT_INTERVAL_SECONDS', 300, 1, 86_400),
      runJobs: bool(env, 'LOTPROOF_RUN_JOBS', true),
      webhookRetryLimit: int(env, 'LOTPROOF_WEBHOOK_RETRY_LIMIT', 8, 0, 50),
      webhookRetryDelaySeconds: int(env, 'LOTPROOF_WEBHOOK_RETRY_DELAY_SECONDS', 10, 1, 3600),
      webhookTimeoutMs: int(env, 'LOTPROOF_WEBHOOK_TIMEOUT_MS', 10_000, 100, 120_000),
      webhookAllowPrivateTargets: bool(env, 'LOTPROOF_WEBHOOK_ALLOW_PRIVATE', development),
    },
  };
}
