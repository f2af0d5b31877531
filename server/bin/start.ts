// `npm start`: the product with its embedded default. Without DATABASE_URL it makes sure Debian's
// PostgreSQL is installed, starts a local cluster under .data/postgres on 127.0.0.1 (under
// /var/lib/lotproof when the postgres user cannot reach .data), builds the console if needed,
// migrates, seeds the demo packer, serves API, docs and console on one port, and stops everything
// again on Ctrl-C or SIGTERM, at any moment of the start-up too.
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
    databaseUrl = cluster.url;
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
  const running = await startServer({ ...config, databaseUrl, smtp }, logger);
  started.push(() => running.stop().catch((err) => logger.error({ err }, 'error while stopping')));
  if (signalled) return;
  const demo = config.seedDemo ? await seedDemo(running.ctx) : null;
  if (signalled) return;
  console.log(`\nLotproof is running.\n  console  ${running.url}/\n  API docs ${running.url}/docs\n  API      ${running.url}/v1\n  ready    ${running.url}/readyz`);
  if (mailCatcher) console.log(`  mail     captured locally (SMTP 127.0.0.1:${mailCatcher.port}); read it at ${running.url}/dev/mailbox`);
  if (demo) console.log(demo.banner);
  console.log('\nPress Ctrl-C to stop.');
}

main().catch(async (err) => {
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
