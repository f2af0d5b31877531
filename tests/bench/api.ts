// `npm run bench:api`: throughput and latency of POST /v1/lots (50 measurements, 32 connections)
// against a bare Express + pg insert route on the same throwaway database, beside the same stack
// answering a request with no lot work (GET /v1/rulebooks), the chain checked afterwards; then lots of
// 1 000 000 measurements end to end (one warm-up, median of five) beside JSON.parse of the same
// body. Prints numbers; it is not a timed test.
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readdirSync, readFileSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import autocannon from 'autocannon';
import { openDatabase } from '../../server/db/database';
import { migrate } from '../../server/db/migrate';
import { Organisation } from '../../server/models';
import { issueApiKey } from '../../server/identity/api-key-store';
import { createProduct } from '../../server/products/products';
import { packContents, seededRng } from '../../server/demo/random';
import { ensureDebianPackages } from '../../server/platform/debian-packages';
import { destroyCluster, freePort, startCluster, type RunningCluster } from '../../server/platform/embedded-postgres';

const DURATION = Number(process.env.BENCH_SECONDS ?? 10);
const CONNECTIONS = 32;
// Knobs for investigating (all optional): BENCH_ONLY=bare,floor,api,api2,big runs a subset (api2: the
// same POST to LOTPROOF_PROCESSES=2, two API processes on one port); BENCH_CPU_PROF=<dir>
// writes a V8 CPU profile of the API process there; BENCH_WAITS=1 tallies PostgreSQL wait events
// during the Lotproof run; BENCH_NODE_ARGS="--flag …" starts the API process with those Node flags.
const ONLY = new Set((process.env.BENCH_ONLY ?? 'bare,floor,api,api2,big').split(','));
const CPU_PROF = process.env.BENCH_CPU_PROF ?? '';
const children: ChildProcess[] = [];
let cluster: RunningCluster | null = null;

function startChild(script: string, env: Record<string, string>, nodeArgs: string[] = []): Promise<ChildProcess> {
  return new Promise((resolve, reject) => {
    // One process per server (node with the tsx loader, no npx wrapper), so SIGTERM reaches it.
    const child = spawn(process.execPath, [...nodeArgs, '--import', 'tsx', script], { env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'inherit'] });
    children.push(child);
    let out = '';
    child.stdout!.on('data', (c) => {
      out += String(c);
      if (/ready|Lotproof is running/.test(out)) resolve(child);
    });
    child.once('exit', (code) => reject(new Error(`${script} exited with ${code}`)));
  });
}

/** CPU seconds (user + system) used so far by the server process (with its worker processes, when it
 *  runs several) and by all PostgreSQL processes. */
function cpuSeconds(serverPid: number | undefined): { server: number; postgres: number } {
  const ticks = (pid: string) => {
    try {
      const f = readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1]!.split(' ');
      return { ppid: f[1]!, t: (Number(f[11]) + Number(f[12])) / 100, comm: readFileSync(`/proc/${pid}/comm`, 'utf8').trim() };
    } catch {
      return null;
    }
  };
  let postgres = 0;
  const port = String(cluster?.port ?? '');
  for (const pid of readdirSync('/proc').filter((d) => /^\d+$/.test(d))) {
    const s = ticks(pid);
    if (!s || s.comm !== 'postgres') continue;
    // only this cluster's processes: the postmaster's command line names the port
    const master = s.ppid !== '1' && readFileSync(`/proc/${s.ppid}/cmdline`, 'utf8').includes(port) ? s.ppid : null;
    if (master || readFileSync(`/proc/${pid}/cmdline`, 'utf8').includes(`-p\0${port}`)) postgres += s.t;
  }
  let server = 0;
  if (serverPid) {
    server = ticks(String(serverPid))?.t ?? 0;
    for (const pid of readdirSync('/proc').filter((d) => /^\d+$/.test(d))) {
      const s = ticks(pid);
      if (s && s.ppid === String(serverPid) && s.comm === 'node') server += s.t;
    }
  }
  return { server, postgres };
}

async function run(url: string, headers: Record<string, string>, body: string | null, title: string, serverPid?: number) {
  const method = body === null ? 'GET' : 'POST';
  // idReplacement: each request's `[<id>]` becomes a fresh id, so each POST is a lot of its own (one lot, one judgement).
  const req = { url, method, headers, ...(body === null ? {} : { body, idReplacement: true }), connections: CONNECTIONS } as const;
  // warm-up, then the measured run
  await autocannon({ ...req, duration: 2 });
  const c0 = cpuSeconds(serverPid);
  const r = await autocannon({ ...req, duration: DURATION });
  const c1 = cpuSeconds(serverPid);
  const ok = r['2xx'];
  const rate = ok / DURATION;
  const per = (x: number) => ((1000 * x) / Math.max(1, ok)).toFixed(2);
  console.log(`${title.padEnd(34)} ${rate.toFixed(0).padStart(6)} ${body === null ? 'req/s ' : 'lots/s'}   p50 ${String(r.latency.p50).padStart(4)} ms   p99 ${String(r.latency.p99).padStart(4)} ms   non-2xx ${r.non2xx}  errors ${r.errors}`);
  // PostgreSQL's share is only indicative: backends that exit during the run take their CPU with them.
  const pg = c1.postgres - c0.postgres;
  console.log(`${''.padEnd(34)} CPU per ${body === null ? 'request' : 'lot'}: server ${per(c1.server - c0.server)} ms${pg > 0 ? `, PostgreSQL ≥ ${per(pg)} ms` : ''}`);
  return { rate, r };
}

async function timed<T>(f: () => Promise<T> | T): Promise<[number, T]> {
  const t0 = performance.now();
  const v = await f();
  return [performance.now() - t0, v];
}

/** Polls pg_stat_activity and counts what the server's connections are waiting on. */
function sampleWaits(db: ReturnType<typeof openDatabase>) {
  const tally: Record<string, number> = {};
  let on = true;
  const loop = (async () => {
    while (on) {
      const rows = (await db.sequelize.query(
        `SELECT state, wait_event_type, wait_event, left(query, 40) AS q FROM pg_stat_activity WHERE application_name = 'lotproof' AND pid <> pg_backend_pid()`,
      ))[0] as { state: string; wait_event_type: string | null; wait_event: string | null; q: string }[];
      for (const r of rows) {
        if (r.state === 'idle') continue;
        const k = `${r.state}:${r.wait_event_type ?? '-'}:${r.wait_event ?? '-'}:${r.q.replace(/\s+/g, ' ')}`;
        tally[k] = (tally[k] ?? 0) + 1;
      }
      await new Promise((r) => setTimeout(r, 20));
    }
  })();
  return {
    stop: async () => {
      on = false;
      await loop;
      return Object.fromEntries(Object.entries(tally).sort((a, b) => b[1] - a[1]).slice(0, 15));
    },
  };
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
  const bareChild = await startChild('tests/bench/bare-server.ts', { DATABASE_URL: databaseUrl, PORT: String(barePort) });
  const apiEnv = {
    DATABASE_URL: databaseUrl, NODE_ENV: 'production', LOG_LEVEL: 'warn', LOTPROOF_SEED_DEMO: 'false',
    LOTPROOF_DATA_DIR: join(dir, 'data'), LOTPROOF_BODY_LIMIT_MB: '64', LOTPROOF_RUN_JOBS: 'false',
    LOTPROOF_RATE_LIMIT_PER_KEY: String(big >> 3), LOTPROOF_RATE_LIMIT_PER_ORG: String(big >> 3), LOTPROOF_RATE_LIMIT_PER_IP: String(big >> 3),
  };
  const apiChild = await startChild('server/bin/start.ts', { ...apiEnv, PORT: String(apiPort) }, [...(process.env.BENCH_NODE_ARGS ? process.env.BENCH_NODE_ARGS.split(' ') : []), ...(CPU_PROF ? ['--cpu-prof', '--cpu-prof-dir', CPU_PROF] : [])]);
  const api2Port = await freePort();
  const api2Child = ONLY.has('api2') ? await startChild('server/bin/start.ts', { ...apiEnv, PORT: String(api2Port), LOTPROOF_PROCESSES: '2' }) : null;

  const lot = {
    sku: 'BENCH-500G', lotCode: 'B-[<id>]', line: 'Bench line', lotSize: 2400, testing: 'non-destructive', measurementUnit: 'g', measurementBasis: 'net',
    measurements: packContents(seededRng(7), 50, 503, 2),
  };
  const body = JSON.stringify(lot);
  // What the numbers ran on: server, PostgreSQL and autocannon share these cores, so a ratio of two
  // runs of the same script is what compares; absolute rates move with the machine.
  console.log(`\nmachine: ${cpus().length} × ${cpus()[0]?.model.trim() ?? 'unknown CPU'}, Node ${process.version}, load average ${loadavg().map((x) => x.toFixed(2)).join(' ')}`);
  console.log(`\nPOST of one lot of 50 measurements, ${CONNECTIONS} connections, ${DURATION} s (after a 2 s warm-up):`);
  const bare = ONLY.has('bare') ? await run(`http://127.0.0.1:${barePort}/bare`, { 'content-type': 'application/json' }, body, 'bare Express + pg insert', bareChild.pid) : null;
  // The ceiling this stack sets before any lot work: the same server and middleware (logging,
  // security headers, bearer key, rate limits and usage, OpenAPI validation) answering
  // GET /v1/rulebooks, which has no body, reads nothing beyond the key and writes nothing. No route
  // of this stack does less, so it bounds what the sealed POST can reach as a share of the bare route.
  const floor = ONLY.has('floor')
    ? await run(`http://127.0.0.1:${apiPort}/v1/rulebooks`, { authorization: `Bearer ${secret}` }, null, 'same stack, no lot (GET /v1/rulebooks)', apiChild.pid)
    : null;
  const waits = process.env.BENCH_WAITS ? sampleWaits(db) : null;
  const api = ONLY.has('api') ? await run(`http://127.0.0.1:${apiPort}/v1/lots`, { 'content-type': 'application/json', authorization: `Bearer ${secret}` }, body, 'Lotproof POST /v1/lots (sealed)', apiChild.pid) : null;
  if (waits) console.log(`PostgreSQL wait events during the run (samples): ${JSON.stringify(await waits.stop())}`);
  // The same POST to two API processes sharing one port (LOTPROOF_PROCESSES=2), right after the one-process run.
  const api2 = api2Child
    ? await run(`http://127.0.0.1:${api2Port}/v1/lots`, { 'content-type': 'application/json', authorization: `Bearer ${secret}` }, body, 'Lotproof POST, 2 processes', api2Child.pid)
    : null;
  if (api && api2) console.log(`ratio 2 processes / 1 process: ${(api2.rate / api.rate).toFixed(2)} ×  (on ${cpus().length} cores shared with PostgreSQL and the load generator)`);
  if (bare && floor) console.log(`ratio same stack without a lot / bare: ${((100 * floor.rate) / bare.rate).toFixed(0)} %  (what any route of this stack can reach here)`);
  if (bare && api) console.log(`ratio Lotproof / bare: ${((100 * api.rate) / bare.rate).toFixed(0)} %  (target ≥ 60 %)`);

  const verify = await fetch(`http://127.0.0.1:${apiPort}/v1/ledger/verify`, { headers: { authorization: `Bearer ${secret}` } }).then((r) => r.json());
  console.log(`chain after the run: ${verify.intact ? 'intact' : 'BROKEN'}, ${verify.verdictsChecked} verdicts checked${verify.firstBreak ? `; first break ${JSON.stringify(verify.firstBreak)}` : ''}`);

  if (!ONLY.has('big')) return void (await db.close());
  const n = 1_000_000;
  const bigLot = { ...lot, lotCode: 'B-BIG', lotSize: 2_000_000, measurements: packContents(seededRng(8), n, 503, 2, 2) };
  const bigBody = JSON.stringify(bigLot);
  const parseTimes: number[] = [];
  for (let i = 0; i < 5; i++) parseTimes.push((await timed(() => JSON.parse(bigBody)))[0]);
  const postTimes: number[] = [];
  // One unmeasured lot first, as the throughput runs have their warm-up: the first 7 MB record makes
  // a fresh cluster create WAL segments and the server compile its big-lot paths.
  for (let i = -1; i < 5; i++) {
    const [ms, res] = await timed(() =>
      fetch(`http://127.0.0.1:${apiPort}/v1/lots`, { method: 'POST', headers: { 'content-type': 'application/json', authorization: `Bearer ${secret}` }, body: bigBody.replace('"B-BIG"', `"B-BIG-${i + 2}"`) }).then(async (r) => ({ status: r.status, text: await r.text() })),
    );
    if (res.status !== 201) throw new Error(`1M lot: ${res.status} ${res.text.slice(0, 300)}`);
    if (i >= 0) postTimes.push(ms);
    else console.log(`\n1 000 000-measurement lot, warm-up (not counted): ${ms.toFixed(0)} ms`);
  }
  const p = median(parseTimes);
  const e = median(postTimes);
  console.log(`1 000 000-measurement lot (${(bigBody.length / 1e6).toFixed(1)} MB JSON): end to end ${e.toFixed(0)} ms (median of 5; runs ${postTimes.map((x) => x.toFixed(0)).join(', ')} ms)`);
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
