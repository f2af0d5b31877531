// `npm start`: the product with its embedded default. Without DATABASE_URL it makes sure Debian's
// PostgreSQL is installed, starts a local cluster under .data/postgres on 127.0.0.1, builds the
// console if needed, migrates, seeds the demo packer, serves API, docs and console on one port,
// and stops everything again on Ctrl-C or SIGTERM.
import { existsSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { loadConfig, ConfigError } from '../config';
import { createLogger } from '../logger';
import { ensureDebianPackages, MissingPackagesError } from '../platform/debian-packages';
import { startCluster, type RunningCluster } from '../platform/embedded-postgres';
import { startServer } from '../server';
import { CONSOLE_DIST } from '../app';
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

async function main(): Promise<void> {
  const config = loadConfig();
  const logger = createLogger(config.logLevel);
  let cluster: RunningCluster | null = null;
  let databaseUrl = config.databaseUrl;
  if (databaseUrl && !config.secretsKey) {
    // A database of one's own is often shared by several servers: they must seal alike.
    logger.warn(`LOTPROOF_SECRETS_KEY is not set: webhook secrets are sealed with ${join(config.dataDir, 'secrets-key')}; every server sharing this database needs the same key (set LOTPROOF_SECRETS_KEY on all of them)`);
  }
  if (!databaseUrl) {
    ensureDebianPackages(['postgresql']);
    mkdirSync(config.dataDir, { recursive: true });
    cluster = startCluster({
      dir: join(config.dataDir, 'postgres'),
      port: config.embeddedPgPort,
      database: 'lotproof',
      log: (l) => console.log(l),
    });
    databaseUrl = cluster.url;
  }
  const stopCluster = () => cluster?.stop();
  try {
    await buildConsoleIfMissing();
    // Development: e-mail goes to a local SMTP fake on loopback; the console's mailbox page shows it.
    let mailCatcher: RunningSmtpFake | null = null;
    if (config.smtp.fake) {
      mailCatcher = await startSmtpFake({ host: '127.0.0.1', port: config.smtp.port }).catch(() => startSmtpFake({ host: '127.0.0.1', port: 0 }));
    }
    const smtp = mailCatcher ? { ...config.smtp, host: mailCatcher.host, port: mailCatcher.port } : config.smtp;
    const running = await startServer({ ...config, databaseUrl, smtp }, logger);
    const demo = config.seedDemo ? await seedDemo(running.ctx) : null;
    console.log(`\nLotproof is running.\n  console  ${running.url}/\n  API docs ${running.url}/docs\n  API      ${running.url}/v1\n  ready    ${running.url}/readyz`);
    if (mailCatcher) console.log(`  mail     captured locally (SMTP 127.0.0.1:${mailCatcher.port}); read it at ${running.url}/dev/mailbox`);
    if (demo) console.log(demo.banner);
    console.log('\nPress Ctrl-C to stop.');
    let shuttingDown = false;
    const shutdown = (signal: string) => {
      if (shuttingDown) return;
      shuttingDown = true;
      console.log(`\n${signal}: finishing in-flight requests and stopping…`);
      running
        .stop()
        .catch((err) => logger.error({ err }, 'error while stopping'))
        .finally(async () => {
          await mailCatcher?.stop();
          stopCluster();
          process.exit(0);
        });
    };
    process.on('SIGINT', () => shutdown('SIGINT'));
    process.on('SIGTERM', () => shutdown('SIGTERM'));
  } catch (err) {
    stopCluster();
    throw err;
  }
}

main().catch((err) => {
  if (err instanceof ConfigError || err instanceof MissingPackagesError) {
    console.error(err.message);
  } else {
    console.error(err);
  }
  process.exit(1);
});
