// Starting and stopping one Lotproof API process: database, migrations, HTTP listener, graceful
// stop, and what the process does with an error nothing caught (installProcessGuards).
import type { Server } from 'node:http';
import type { Logger } from 'pino';
import { createApp } from './app';
import type { Config } from './config';
import { openDatabase, type Database } from './db/database';
import { prepareDatabase } from './db/prepare';
import type { AppContext } from './http/context';
import { answerClientErrorsAsProblems } from './http/client-errors';
import { createHttpServer } from './http/http-server';
import { startJobs, type RunningJobs } from './jobs';
import { currentSigningKey, publishSigningKey } from './verdicts/signing-keys';
import { secretBox } from './core/secret-box';
import { resealWebhookSecrets } from './webhooks/endpoints';
import { startAsideThread } from './core/aside-thread';

export interface RunningServer {
  url: string;
  ctx: AppContext;
  server: Server;
  /** Stops accepting connections, lets in-flight requests finish, then closes the pool. */
  stop: () => Promise<void>;
}

export interface StartOptions {
  /**
   * What to stop when an exception nothing caught ends the process (see installProcessGuards):
   * by default this server; a caller that started more around it (the embedded PostgreSQL, the
   * SMTP fake) passes a stop of everything.
   */
  onFatal?: () => Promise<void>;
}

type Guard = { logger: Logger; stop: () => Promise<void> };
const guards = new Set<Guard>();
let fatal = false;

const SECRET_SHAPES: Array<[RegExp, string]> = [
  [/(postgres(?:ql)?:\/\/[^:/@\s]+:)[^@\s]+@/gi, '$1[redacted]@'],
  [/whsec_[A-Za-z0-9+/=]+/g, 'whsec_[redacted]'],
  [/lpk_[A-Za-z0-9_-]+/g, 'lpk_[redacted]'],
  [/(password|secret|token)=[^&\s]+/gi, '$1=[redacted]'],
];

/** An error as the log may carry it: its kind, code, message and stack, with anything secret-shaped masked — never its SQL, bind values or other fields. */
export function loggableError(err: unknown): { type: string; code?: string; message: string; stack?: string } {
  const e = (err ?? {}) as { name?: unknown; code?: unknown; message?: unknown; stack?: unknown };
  const clean = (text: string) => SECRET_SHAPES.reduce((t, [re, to]) => t.replace(re, to), text).slice(0, 2_000);
  const message = clean(typeof e.message === 'string' ? e.message : String(err));
  const frames = typeof e.stack === 'string' ? e.stack.split('\n').filter((l) => /^\s+at /.test(l)).slice(0, 12).join('\n') : undefined;
  return { type: typeof e.name === 'string' ? e.name : typeof err, ...(typeof e.code === 'string' ? { code: e.code } : {}), message, ...(frames ? { stack: clean(frames) } : {}) };
}

function onUnhandledRejection(reason: unknown): void {
  // A promise nobody waited for failed: the work it stood for is lost, but nothing is left half
  // done in this process's memory that requests depend on, so the process keeps serving.
  for (const g of guards) {
    g.logger.error({ err: loggableError(reason) }, 'a promise was rejected and nothing handled it; logged, still serving');
    break;
  }
}

function onUncaughtException(err: unknown, origin: string): void {
  // A throw nothing caught has unwound a stack we know nothing about: the process may be in any
  // state, so it stops — no new connections, requests under way finish (at most 10 s), the job
  // side and the pool close — and exits non-zero, for its supervisor to start it again.
  const first = [...guards][0];
  first?.logger.fatal({ err: loggableError(err), origin }, 'an exception nothing caught: stopping (requests under way finish), then exiting for a restart');
  if (fatal) return;
  fatal = true;
  process.exitCode = 1;
  const deadline = setTimeout(() => process.exit(1), 30_000);
  void Promise.allSettled([...guards].map((g) => g.stop())).finally(() => {
    clearTimeout(deadline);
    process.exit(1);
  });
}

/**
 * Installs the process-wide policy for errors nothing caught (once per process, while any server
 * runs): an unhandled rejection is logged and the process keeps serving; an uncaught exception is
 * logged, the server stops cleanly (`stop`), and the process exits with code 1. Returns the removal.
 */
export function installProcessGuards(logger: Logger, stop: () => Promise<void>): () => void {
  const guard: Guard = { logger, stop };
  if (guards.size === 0) {
    process.on('unhandledRejection', onUnhandledRejection);
    process.on('uncaughtException', onUncaughtException);
  }
  guards.add(guard);
  return () => {
    if (!guards.delete(guard) || guards.size > 0) return;
    process.off('unhandledRejection', onUnhandledRejection);
    process.off('uncaughtException', onUncaughtException);
  };
}

export async function startServer(config: Config & { databaseUrl: string }, logger: Logger, options: StartOptions = {}): Promise<RunningServer> {
  const db: Database = openDatabase(config.databaseUrl, logger);
  // Migrations as the tables' owner (LOTPROOF_MIGRATION_DATABASE_URL), the app's rights granted (issue 15).
  await prepareDatabase(config, logger);
  const ctx: AppContext = { config, db, logger };
  // The seal signing key: read (or created) now, so a bad LOTPROOF_SIGNING_KEY stops the start.
  await publishSigningKey(db.sequelize, currentSigningKey(config));
  // Webhook secrets in clear (earlier versions) or under a previous key are sealed anew (a bad key stops the start).
  const sealed = await resealWebhookSecrets(db.sequelize, secretBox(config));
  if (sealed.unreadable > 0) {
    logger.warn(`${sealed.unreadable} stored webhook secret(s) do not open with this server's secrets key (LOTPROOF_SECRETS_KEY or <dataDir>/secrets-key); their deliveries will fail until the key that sealed them is configured`);
  }
  const app = createApp(ctx);
  startAsideThread();
  // From here on a job, timer or event handler runs beside us: the process-wide policy is in place
  // before the first of them starts.
  let stop: () => Promise<void> = async () => {
    await jobs?.stop();
    await db.close();
  };
  const removeGuards = installProcessGuards(logger, options.onFatal ?? (() => stop()));
  let jobs: RunningJobs | null = null;
  try {
    jobs = config.verdicts.runJobs ? await startJobs(ctx) : null;
  } catch (err) {
    removeGuards();
    throw err;
  }
  // Timeouts for slow clients and a cap on connections (LOTPROOF_HEADERS_TIMEOUT_MS and the others: http/http-server.ts).
  const server = createHttpServer(app, config.http, config.bodyLimitBytes);
  await new Promise<void>((resolve, reject) => {
    server.listen(config.port, config.host, () => resolve());
    server.once('error', reject);
  }).catch(async (err) => {
    await jobs?.stop();
    removeGuards();
    throw err;
  });
  answerClientErrorsAsProblems(server);
  const addr = server.address();
  const port = typeof addr === 'object' && addr ? addr.port : config.port;
  let stopping: Promise<void> | null = null;
  stop = () =>
    (stopping ??= (async () => {
      await new Promise<void>((resolve) => {
        server.close(() => resolve());
        server.closeIdleConnections();
        // Requests still running after 10 s are cut off rather than holding the shutdown forever.
        setTimeout(() => server.closeAllConnections(), 10_000).unref();
      });
      await jobs?.stop();
      await db.close();
      removeGuards();
    })());
  return {
    url: `http://${config.host}:${port}`,
    ctx,
    server,
    stop,
  };
}
