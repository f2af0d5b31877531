// `npm run bench:api`: throughput and latency of POST /v1/lots (50 measurements, 32 connections)
// against a bare Express + pg insert route on the same throwaway database, the chain checked
// afterwards; then one lot of 1 000 000 measurements end to end beside JSON.parse of the same
// body. Prints numbers; it is not a timed test.
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import autocannon from 'autocannon';
import { openDatabase } from '../../server/db/database';
import { migrate } from '../../server/db/migrate';
import { Organisation } from '../../server/models';
import { issueApiKey } from '../../server/services/api-keys';
import { createProduct } from '../../server/services/products';
import { packContents, seededRng } from '../../server/demo/random';
import { ensureDebianPackages } from '../../server/platform/debian-packages';
import { destroyCluster, freePort, startCluster, type RunningCluster } from '../../server/platform/embedded-postgres';

const DURATION = Number(process.env.BENCH_SECONDS ?? 10);
const CONNECTIONS = 32;
const children: ChildProcess[] = [];
let cluster: RunningCluster | null = null;

function startChild(script: string, env: Record<string, string>): Promise<ChildProcess> {
  return new Promise((resolve, reject) => {
    // One process per server (node with the tsx loader, no npx wrapper), so SIGTERM reaches it.
    const child = spawn(process.execPath, ['--import', 'tsx', script], { env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'inherit'] });
    children.push(child);
    let out = '';
    child.stdout!.on('data', (c) => {
      out += String(c);
      if (/ready|Lotproof is running/.test(out)) resolve(child);
    });
    child.once('exit', (code) => reject(new Error(`${script} exited with ${code}`)));
  });
}

async function run(url: string, headers: Record<string, string>, body: string, title: string) {
  // warm-up, then the measured run
  await autocannon({ url, method: 'POST', headers, body, connections: CONNECTIONS, duration: 2 });
  const r = await autocannon({ url, method: 'POST', headers, body, connections: CONNECTIONS, duration: DURATION });
  const ok = r['2xx'];
  const rate = ok / DURATION;
  console.log(`${title.padEnd(34)} ${rate.toFixed(0).padStart(6)} lots/s   p50 ${String(r.latency.p50).padStart(4)} ms   p99 ${String(r.latency.p99).padStart(4)} ms   non-2xx ${r.non2xx}  errors ${r.errors}`);
  return { rate, r };
}

async function timed<T>(f: () => Promise<T> | T): Promise<[number, T]> {
  const t0 = performance.now();
  const v = await f();
  return [performance.now() - t0, v];
}

const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)]!;

async function main() {
  ensureDebianPackages(['postgresql']);
  const dir = mkdtempSync(join(tmpdir(), 'lotproof-bench-pg-'));
  cluster = startCluster({ dir, port: await freePort(), database: 'lotproof_bench' });
  const databaseUrl = cluster.url;
  const db = openDatabase(databaseUrl);
  await migrate(db.sequelize);
  const org = await Organisation.create({ name: 'Bench packer', slug: `bench-${Date.now()}` });
  const { secret } = await issueApiKey({ organisationId: org.id, name: 'bench', scopes: ['lots:submit', 'products:write', 'audit:read'] });
  await createProduct({ organisationId: org.id, kind: 'api-key', scopes: ['products:write'] }, {
    sku: 'BENCH-500G', name: 'Bench oats 500 g', nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211' },
  });

  const barePort = await freePort();
  const apiPort = await freePort();
  const big = 10_000_000 << 3;
  await startChild('tests/bench/bare-server.ts', { DATABASE_URL: databaseUrl, PORT: String(barePort) });
  await startChild('server/bin/start.ts', {
    DATABASE_URL: databaseUrl, PORT: String(apiPort), NODE_ENV: 'production', LOG_LEVEL: 'warn', LOTPROOF_SEED_DEMO: 'false',
    LOTPROOF_DATA_DIR: join(dir, 'data'), LOTPROOF_BODY_LIMIT_MB: '64', LOTPROOF_RUN_JOBS: 'false',
    LOTPROOF_RATE_LIMIT_PER_KEY: String(big >> 3), LOTPROOF_RATE_LIMIT_PER_ORG: String(big >> 3), LOTPROOF_RATE_LIMIT_PER_IP: String(big >> 3),
  });

  const lot = {
    sku: 'BENCH-500G', lotCode: 'B-1', line: 'Bench line', lotSize: 2400, testing: 'non-destructive', measurementUnit: 'g', measurementBasis: 'net',
    measurements: packContents(seededRng(7), 50, 503, 2),
  };
  const body = JSON.stringify(lot);
  console.log(`\nPOST of one lot of 50 measurements, ${CONNECTIONS} connections, ${DURATION} s (after a 2 s warm-up):`);
  const bare = await run(`http://127.0.0.1:${barePort}/bare`, { 'content-type': 'application/json' }, body, 'bare Express + pg insert');
  const api = await run(`http://127.0.0.1:${apiPort}/v1/lots`, { 'content-type': 'application/json', authorization: `Bearer ${secret}` }, body, 'Lotproof POST /v1/lots (sealed)');
  console.log(`ratio Lotproof / bare: ${((100 * api.rate) / bare.rate).toFixed(0)} %  (target ≥ 60 %)`);

  const verify = await fetch(`http://127.0.0.1:${apiPort}/v1/ledger/verify`, { headers: { authorization: `Bearer ${secret}` } }).then((r) => r.json());
  console.log(`chain after the run: ${verify.intact ? 'intact' : 'BROKEN'}, ${verify.verdictsChecked} verdicts checked${verify.firstBreak ? `; first break ${JSON.stringify(verify.firstBreak)}` : ''}`);

  const n = 1_000_000;
  const bigLot = { ...lot, lotCode: 'B-BIG', lotSize: 2_000_000, measurements: packContents(seededRng(8), n, 503, 2, 2) };
  const bigBody = JSON.stringify(bigLot);
  const parseTimes: number[] = [];
  for (let i = 0; i < 5; i++) parseTimes.push((await timed(() => JSON.parse(bigBody)))[0]);
  const postTimes: number[] = [];
  for (let i = 0; i < 3; i++) {
    const [ms, res] = await timed(() =>
      fetch(`http://127.0.0.1:${apiPort}/v1/lots`, { method: 'POST', headers: { 'content-type': 'application/json', authorization: `Bearer ${secret}` }, body: bigBody }).then(async (r) => ({ status: r.status, text: await r.text() })),
    );
    if (res.status !== 201) throw new Error(`1M lot: ${res.status} ${res.text.slice(0, 300)}`);
    postTimes.push(ms);
  }
  const p = median(parseTimes);
  const e = median(postTimes);
  console.log(`\n1 000 000-measurement lot (${(bigBody.length / 1e6).toFixed(1)} MB JSON): end to end ${e.toFixed(0)} ms (median of 3; runs ${postTimes.map((x) => x.toFixed(0)).join(', ')} ms)`);
  console.log(`JSON.parse of the same body: ${p.toFixed(0)} ms (median of 5)  →  ${(e / p).toFixed(2)} × JSON.parse  (target < 3 ×)`);
  await db.close();
}

function cleanup() {
  for (const c of children) c.kill('SIGTERM');
  if (cluster) {
    const c = cluster;
    cluster = null;
    setTimeout(() => destroyCluster(c), 500);
  }
}

main()
  .then(() => {
    cleanup();
    setTimeout(() => process.exit(0), 1500);
  })
  .catch((err) => {
    console.error(err);
    cleanup();
    setTimeout(() => process.exit(1), 1500);
  });
