// Starting and stopping one Lotproof API process: database, migrations, HTTP listener, graceful stop.
import type { Server } from 'node:http';
import type { Logger } from 'pino';
import { createApp } from './app';
import type { Config } from './config';
import { openDatabase, type Database } from './db/database';
import { migrate } from './db/migrate';
import type { AppContext } from './http/context';
import { answerClientErrorsAsProblems } from './http/client-errors';
import { startJobs, type RunningJobs } from './jobs';
import { currentSigningKey, publishSigningKey } from './verdicts/signing-keys';
import { secretBox } from './core/secret-box';
import { resealWebhookSecrets } from './webhooks/endpoints';
import { startAsideWorker } from './verdicts/canonical-aside';

export interface RunningServer {
  url: string;
  ctx: AppContext;
  server: Server;
  /** Stops accepting connections, lets in-flight requests finish, then closes the pool. */
  stop: () => Promise<void>;
}

export async function startServer(config: Config & { databaseUrl: string }, logger: Logger): Promise<RunningServer> {
  const db: Database = openDatabase(config.databaseUrl, logger);
  await migrate(db.sequelize, (m) => logger.debug(m));
  const ctx: AppContext = { config, db, logger };
  // The seal signing key: read (or created) now, so a bad LOTPROOF_SIGNING_KEY stops the start.
  await publishSigningKey(db.sequelize, currentSigningKey(config));
  // Webhook secrets in clear (earlier versions) or under a previous key are sealed anew (a bad key stops the start).
  const sealed = await resealWebhookSecrets(db.sequelize, secretBox(config));
  if (sealed.unreadable > 0) {
    logger.warn(`${sealed.unreadable} stored webhook secret(s) do not open with this server's secrets key (LOTPROOF_SECRETS_KEY or <dataDir>/secrets-key); their deliveries will fail until the key that sealed them is configured`);
  }
  const app = createApp(ctx);
  // The thread that writes big lots' numbers beside the engine, loaded before the first one arrives.
  startAsideWorker();
  const jobs: RunningJobs | null = config.verdicts.runJobs ? await startJobs(ctx) : null;
  const server = await new Promise<Server>((resolve, reject) => {
    const s = app.listen(config.port, config.host, () => resolve(s));
    s.once('error', reject);
  });
  server.keepAliveTimeout = 5_000;
  answerClientErrorsAsProblems(server);
  const addr = server.address();
  const port = typeof addr === 'object' && addr ? addr.port : config.port;
  let stopping: Promise<void> | null = null;
  return {
    url: `http://${config.host}:${port}`,
    ctx,
    server,
    stop: () =>
      (stopping ??= (async () => {
        await new Promise<void>((resolve) => {
          server.close(() => resolve());
          server.closeIdleConnections();
          // Requests still running after 10 s are cut off rather than holding the shutdown forever.
          setTimeout(() => server.closeAllConnections(), 10_000).unref();
        });
        await jobs?.stop();
        await db.close();
      })()),
  };
}
