// `npm start`: the product with its embedded default. Without DATABASE_URL it makes sure Debian's
// PostgreSQL is installed, starts a local cluster under .data/postgres on 127.0.0.1 (under
// /var/lib/lotproof when the postgres user cannot reach .data), builds the console if needed,
// migrates, seeds the demo packer, serves API, docs and console on one port, and stops everything
// again on Ctrl-C or SIGTERM, at any moment of the start-up too. With LOTPROOF_PROCESSES=N (N > 1)
// it prepares everything once, then serves from N worker processes sharing the port (node:cluster),
// and starts a worker again whenever one exits unexpectedly.
import cluster, { type Worker } from 'node:cluster';
import { existsSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { loadConfig, ConfigError } from '../config';
import { createLogger } from '../logger';
import { ensureDebianPackages, MissingPackagesError } from '../platform/debian-packages';
import { startCluster, type RunningCluster } from '../platform/embedded-postgres';
import { startServer } from '../server';
import { CONSOLE_DIST } from '../app';
import { openDatabase } from '../db/database';
import { prepareDatabase } from '../db/prepare';
import { secretBox } from '../core/secret-box';
import { currentSigningKey } from '../verdicts/signing-keys';
import { seedDemo } from '../demo/seed';
import '../demo/users';
import '../demo/lots';
import { startSmtpFake, type RunningSmtpFake } from '../platform/smtp-fake';

async function buildConsoleIfMissing(): Promise<void> {
  if (existsSync(join(CONSOLE_DIST, 'index.html')) && !process.argv.includes('--rebuild')) return;
  console.log('Building the console (first run)…');
  const { build } = await import('vite');
  await build({ logLevel: 'warn' });
}

// What has been started so far, newest last: a Ctrl-C, SIGTERM or failed start stops it in reverse
// order. The handlers are installed before anything starts, so no moment of the start-up (the first
// console build takes ~20 s) can leave the embedded PostgreSQL running behind an exited server.
const started: Array<() => unknown> = [];
let stopping: Promise<void> | null = null;
let signalled = false;

function stopEverything(): Promise<void> {
  return (stopping ??= (async () => {
    for (let stop = started.pop(); stop; stop = started.pop()) {
      try {
        await stop();
      } catch (err) {
        console.error('error while stopping:', err);
      }
    }
  })());
}

function onSignal(signal: NodeJS.Signals): void {
  if (signalled) return;
  signalled = true;
  console.log(`\n${signal}: finishing in-flight requests and stopping…`);
  void stopEverything().finally(() => process.exit(0));
}

async function main(): Promise<void> {
  process.on('SIGINT', onSignal);
  process.on('SIGTERM', onSignal);
  const config = loadConfig();
  const logger = createLogger(config.logLevel);
  let databaseUrl = config.databaseUrl;
  let migrationDatabaseUrl = config.migrationDatabaseUrl;
  if (databaseUrl && !config.secretsKey) {
    // A database of one's own is often shared by several servers: they must seal alike.
    logger.warn(`LOTPROOF_SECRETS_KEY is not set: webhook secrets are sealed with ${join(config.dataDir, 'secrets-key')}; every server sharing this database needs the same key (set LOTPROOF_SECRETS_KEY on all of them)`);
  }
  if (!databaseUrl) {
    ensureDebianPackages(['postgresql']);
    mkdirSync(config.dataDir, { recursive: true });
    // Synchronous: a signal that arrives meanwhile is handled once the cluster is up and on the list
    // (and the server, in our process group, has had a terminal's Ctrl-C itself).
    const cluster: RunningCluster = startCluster({
      dir: join(config.dataDir, 'postgres'),
      port: config.embeddedPgPort,
      database: 'lotproof',
      log: (l) => console.log(l),
    });
    // A server another live process started (the CLI, say) is theirs to stop.
    if (cluster.startedHere) started.push(() => cluster.stop());
    // Least privilege (issue 15): migrations as the tables' owner, the server as the app role.
    databaseUrl = cluster.appUrl;
    migrationDatabaseUrl = cluster.ownerUrl;
  }
  await buildConsoleIfMissing();
  if (signalled) return;
  // Development: e-mail goes to a local SMTP fake on loopback; the console's mailbox page shows it.
  let mailCatcher: RunningSmtpFake | null = null;
  if (config.smtp.fake) {
    mailCatcher = await startSmtpFake({ host: '127.0.0.1', port: config.smtp.port }).catch(() => startSmtpFake({ host: '127.0.0.1', port: 0 }));
    const catcher = mailCatcher;
    started.push(() => catcher.stop());
  }
  if (signalled) return;
  const smtp = mailCatcher ? { ...config.smtp, host: mailCatcher.host, port: mailCatcher.port } : config.smtp;
  if (config.processes > 1) return serveWithWorkers({ ...config, databaseUrl, migrationDatabaseUrl, smtp }, logger, mailCatcher);
  const running = await startServer({ ...config, databaseUrl, migrationDatabaseUrl, smtp }, logger, { onFatal: stopEverything });
  started.push(() => running.stop().catch((err) => logger.error({ err }, 'error while stopping')));
  if (signalled) return;
  const demo = config.seedDemo ? await seedDemo(running.ctx) : null;
  if (signalled) return;
  announce(running.url, mailCatcher, demo?.banner ?? null);
}

function announce(url: string, mailCatcher: RunningSmtpFake | null, banner: string | null, processes = 1): void {
  console.log(`\nLotproof is running${processes > 1 ? ` (${processes} processes)` : ''}.\n  console  ${url}/\n  API docs ${url}/docs\n  API      ${url}/v1\n  ready    ${url}/readyz`);
  if (mailCatcher) console.log(`  mail     captured locally (SMTP 127.0.0.1:${mailCatcher.port}); read it at ${url}/dev/mailbox`);
  else if (!loadConfig().development) console.log('  mode     production: e-mail goes to SMTP_HOST, no captured mailbox; for a local trial with one, run `npm run dev`');
  if (banner) console.log(banner);
  console.log('\nPress Ctrl-C to stop.');
}

type ReadyConfig = ReturnType<typeof loadConfig> & { databaseUrl: string };

/**
 * N API processes on one port: this process migrates, creates the key files and seeds the demo
 * once, then forks the workers (each a whole server with its own pool and job workers) and keeps
 * them running. A worker that exits while we are not stopping is started again.
 */
async function serveWithWorkers(config: ReadyConfig, logger: ReturnType<typeof createLogger>, mailCatcher: RunningSmtpFake | null): Promise<void> {
  // Done once here, so the workers never race to create a key file or run a migration.
  currentSigningKey(config);
  secretBox(config);
  await prepareDatabase(config, logger);
  const db = openDatabase(config.databaseUrl, logger, 4);
  started.push(() => db.close());
  const demo = config.seedDemo ? await seedDemo({ config, db, logger }) : null;
  if (signalled) return;
  const env = {
    DATABASE_URL: config.databaseUrl,
    ...(config.migrationDatabaseUrl ? { LOTPROOF_MIGRATION_DATABASE_URL: config.migrationDatabaseUrl } : {}),
    SMTP_HOST: config.smtp.host,
    SMTP_PORT: String(config.smtp.port),
    LOTPROOF_SMTP_FAKE: 'false',
    LOTPROOF_SEED_DEMO: 'false',
    LOTPROOF_PROCESSES: '1',
  };
  const workers = new Set<Worker>();
  const fork = (): Promise<string> =>
    new Promise((resolve, reject) => {
      const worker = cluster.fork(env);
      workers.add(worker);
      worker.on('message', (m: { ready?: string }) => m.ready && resolve(m.ready));
      worker.once('exit', (code, signal) => {
        workers.delete(worker);
        reject(new Error(`a worker exited during its start (${signal ?? code})`));
        if (stopping || signalled) return;
        logger.error({ code, signal }, 'an API process exited; starting another');
        setTimeout(() => {
          if (!stopping && !signalled) void fork().catch((err) => logger.error({ err: { message: err.message } }, 'restart failed'));
        }, 1_000).unref();
      });
    });
  started.push(async () => {
    await Promise.all([...workers].map((w) => new Promise<void>((resolve) => {
      w.once('exit', () => resolve());
      w.process.kill('SIGTERM');
    })));
  });
  const urls = await Promise.all(Array.from({ length: config.processes }, () => fork()));
  if (signalled) return;
  announce(urls[0]!, mailCatcher, demo?.banner ?? null, config.processes);
  // The catcher lives in this process; the workers' /dev/mailbox reads their own (empty) list.
  if (mailCatcher) console.log('  (the development mailbox shows captured mail only with LOTPROOF_PROCESSES=1)');
}

/** A worker of serveWithWorkers: one API server, stopped by SIGTERM (or the terminal's Ctrl-C). */
async function runWorker(): Promise<void> {
  const config = loadConfig();
  const logger = createLogger(config.logLevel);
  const running = await startServer({ ...config, databaseUrl: config.databaseUrl! }, logger);
  let done = false;
  const stop = () => {
    if (done) return;
    done = true;
    void running.stop().finally(() => process.exit(0));
  };
  process.on('SIGTERM', stop);
  process.on('SIGINT', stop);
  process.send?.({ ready: running.url });
}

if (cluster.isWorker) {
  runWorker().catch((err) => {
    console.error(err);
    process.exit(1);
  });
} else main().catch(async (err) => {
  // A step cut short by Ctrl-C may fail (its database stopped under it) before the signal handler has
  // run: give it the chance to, and leave the exit to it.
  await new Promise((r) => setTimeout(r, 100));
  if (signalled) return;
  await stopEverything();
  if (err instanceof ConfigError || err instanceof MissingPackagesError) {
    console.error(err.message);
  } else {
    console.error(err);
  }
  process.exit(1);
});
