// `npm test`: the whole suite on a throwaway PostgreSQL cluster.
// Makes sure Debian's postgresql, r-base-core and chromium are present, type-checks everything, starts a cluster in a temp
// folder on a free port (with its owner and app roles), migrates it as the owner, builds the console, runs every vitest project, and removes the
// cluster afterwards — also when tests fail or the run is interrupted.
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { ensureDebianPackages } from '../server/platform/debian-packages';
import { destroyCluster, freePort, startCluster, type RunningCluster } from '../server/platform/embedded-postgres';
import { prepareDatabase } from '../server/db/prepare';

let cluster: RunningCluster | null = null;
let vitest: ChildProcess | null = null;
const cleanup = () => {
  if (cluster) {
    destroyCluster(cluster);
    cluster = null;
  }
};

// Installed before anything starts: a Ctrl-C while the cluster starts, migrates or the console builds
// removes the cluster too; once vitest runs, it gets the signal and the run ends when it does.
for (const sig of ['SIGINT', 'SIGTERM'] as const) {
  process.on(sig, () => {
    if (vitest) {
      vitest.kill(sig);
    } else {
      cleanup();
      process.exit(1);
    }
  });
}

function typecheck(): Promise<number> {
  const child = spawn('npm', ['run', '--silent', 'typecheck'], { stdio: 'inherit' });
  return new Promise((resolve) => child.on('exit', (code) => resolve(code ?? 1)));
}

async function main(): Promise<number> {
  ensureDebianPackages(['postgresql', 'r-base-core', 'chromium', 'poppler-utils']);
  // Strict TypeScript over server, shared, tests and console first: a type error fails the run.
  if (!process.env.LOTPROOF_SKIP_TYPECHECK && (await typecheck()) !== 0) {
    console.error('Type check failed (npm run typecheck).');
    return 1;
  }
  // In the temp folder; when the postgres user cannot reach that, startCluster puts it in a stand-in.
  const dir = mkdtempSync(join(tmpdir(), 'lotproof-test-pg-'));
  cluster = startCluster({ dir, port: await freePort(), database: 'lotproof_test' });
  // Migrated as the tables' owner; the tests' app connects as the app role (least privilege, issue 15).
  await prepareDatabase({ databaseUrl: cluster.appUrl, migrationDatabaseUrl: cluster.ownerUrl });

  const { build } = await import('vite');
  await build({ logLevel: 'error' });

  const args = ['vitest', 'run', ...process.argv.slice(2)];
  const child = spawn('npx', args, {
    stdio: 'inherit',
    env: {
      ...process.env,
      DATABASE_URL: cluster.appUrl,
      // For tests that need more than the app's rights: the owner (DDL), the superuser (the database administrator).
      LOTPROOF_TEST_OWNER_URL: cluster.ownerUrl,
      LOTPROOF_TEST_SUPERUSER_URL: cluster.url,
      LOTPROOF_VALIDATE_RESPONSES: 'true', NODE_ENV: 'test', LOG_LEVEL: 'silent' },
  });
  vitest = child;
  return new Promise((resolve) => child.on('exit', (code, signal) => resolve(code ?? (signal ? 1 : 0))));
}

main()
  .then((code) => {
    cleanup();
    process.exit(code);
  })
  .catch((err) => {
    console.error(err);
    cleanup();
    process.exit(1);
  });
