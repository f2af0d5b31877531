// `npm run bench:ledger`: the ledger's Merkle tree at 1 000 000 verdicts in one throwaway
// organisation. The verdict rows are written straight by SQL, with real seals (SHA-256 of generated
// canonical records that link by previous seal) and real Ed25519 signatures of a bench key; the
// records carry only the fields the chain checks read, not a judged lot. Prints: the tree build
// (incremental, one checkpoint per chunk), inclusion proofs served (the function the API calls) and
// verified, consistency proofs between random checkpoint pairs, the default range check, and the full
// background walk beside crypto.verify alone. It is not a timed test. BENCH_VERDICTS overrides the size.
import { createHash, generateKeyPairSync, sign, verify } from 'node:crypto';
import { mkdtempSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { loadConfig } from '../../server/config';
import { openDatabase } from '../../server/db/database';
import { migrate } from '../../server/db/migrate';
import { checkpointsUpTo, issueCheckpoint } from '../../server/ledger/checkpoints';
import { verifyLedgerRange } from '../../server/ledger/ledger-check';
import { leafHash, verifyConsistency, verifyInclusion } from '../../server/ledger/merkle';
import { proveConsistency, proveInclusion } from '../../server/ledger/proofs';
import { startWalk, walkEnded, getWalk } from '../../server/ledger/walks';
import { createLogger } from '../../server/logger';
import { ensureDebianPackages } from '../../server/platform/debian-packages';
import { destroyCluster, freePort, startCluster } from '../../server/platform/embedded-postgres';
import { canonicalJson } from '../../server/verdicts/canonical';
import { currentSigningKey, recordPublicKey } from '../../server/verdicts/signing-keys';

const N = Number(process.env.BENCH_VERDICTS ?? 1_000_000);
const CHECKPOINTS = 20;
const ORG = '00000000-0000-4000-8000-0000000000b1';
const PRODUCT = '00000000-0000-4000-8000-0000000000b2';

const quantile = (xs: number[], q: number) => {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.min(s.length - 1, Math.floor(q * s.length))]!;
};
const ms = (x: number) => `${x.toFixed(3)} ms`;
const rng = (() => {
  let s = 12345;
  return () => ((s = (s * 1664525 + 1013904223) >>> 0) / 2 ** 32);
})();

ensureDebianPackages(['postgresql']);
const cluster = startCluster({ dir: mkdtempSync(join(tmpdir(), 'lp-bench-ledger-')), port: await freePort(), database: 'bench' });
try {
  const pem = generateKeyPairSync('ed25519').privateKey.export({ format: 'pem', type: 'pkcs8' }) as string;
  const config = loadConfig({ ...process.env, DATABASE_URL: cluster.url, LOTPROOF_SIGNING_KEY: pem, LOTPROOF_DATA_DIR: mkdtempSync(join(tmpdir(), 'lp-bench-ledger-data-')) });
  const db = openDatabase(cluster.url, createLogger('silent'), 6);
  const sq = db.sequelize;
  await migrate(sq);
  const key = currentSigningKey(config);
  await recordPublicKey(sq, key, new Date('2020-01-01T00:00:00Z'));
  await sq.query(`INSERT INTO organisations (id, name, slug) VALUES ('${ORG}', 'Bench packer (ledger)', 'bench-ledger')`);
  await sq.query(`INSERT INTO products (id, organisation_id, sku, name, nominal_quantity, unit, tare_mode, rulebook) VALUES ('${PRODUCT}', '${ORG}', 'S', 'S', 500, 'g', 'none', '{"id":"eu-76-211"}')`);
  console.log(`bench:ledger — ${N.toLocaleString('en')} verdicts, ${cpus().length} cores, load ${loadavg().map((l) => l.toFixed(1)).join(' ')}`);

  // Chunk ends: random sizes, one checkpoint after each chunk (the tree is extended incrementally).
  const ends = [...new Set(Array.from({ length: CHECKPOINTS - 1 }, () => 1 + Math.floor(rng() * (N - 1))))].sort((a, b) => a - b).concat(N);
  let previous: string | null = null;
  let seq = 0;
  let writeMs = 0;
  let signMs = 0;
  let buildMs = 0;
  const t0 = Date.parse('2025-06-01T00:00:00Z');
  for (const end of ends) {
    while (seq < end) {
      const batch = Math.min(10_000, end - seq);
      const seqs: number[] = [];
      const seals: string[] = [];
      const prevs: (string | null)[] = [];
      const sigs: string[] = [];
      const records: string[] = [];
      const s0 = performance.now();
      for (let i = 0; i < batch; i++) {
        seq++;
        const record = canonicalJson({
          format: 'lotproof.verdict-record/1',
          organisation: { id: ORG, name: 'Bench packer (ledger)' },
          previousSeal: previous,
          recordedAt: new Date(t0 + seq * 1000).toISOString(),
          result: { decision: seq % 9 === 0 ? 'nonconforming' : 'conforming' },
          sequence: seq,
          verdictId: `bench-${seq}`,
        });
        const seal = createHash('sha256').update(record, 'utf8').digest('hex');
        seqs.push(seq);
        seals.push(seal);
        prevs.push(previous);
        sigs.push(sign(null, Buffer.from(seal, 'hex'), key.privateKey).toString('base64url'));
        records.push(record);
        previous = seal;
      }
      signMs += performance.now() - s0;
      const w0 = performance.now();
      await sq.query(
        `INSERT INTO verdicts (id, organisation_id, sequence, seal, previous_seal, signature, kid, record, product_id, product_sku, product_name, product_spec,
           lot_code, line, packed_at, lot_size, testing, measurement_unit, measurement_count, client_reference, source_format, first_sample_verdict_id,
           decision, result, engine_version, rulebook_id, rulebook_version, recorded_at)
         SELECT gen_random_uuid(), $1, s, seal, prev, sig, $2, rec, $3, 'S', 'S', '{}', 'L-' || s, 'line', NULL, 1000, 'destructive', 'g', 50, NULL, 'json', NULL,
           'conforming', '{}', '1', 'eu-76-211', '1', $4::timestamptz + s * interval '1 second'
         FROM unnest($5::bigint[], $6::text[], $7::text[], $8::text[], $9::text[]) AS t(s, seal, prev, sig, rec)`,
        { bind: [ORG, key.kid, PRODUCT, new Date(t0).toISOString(), seqs, seals, prevs, sigs, records] },
      );
      writeMs += performance.now() - w0;
    }
    const b0 = performance.now();
    await issueCheckpoint(sq, config, ORG);
    buildMs += performance.now() - b0;
  }
  await sq.query('ANALYZE verdicts; ANALYZE ledger_tree_nodes');
  console.log(`setup: ${N.toLocaleString('en')} records sealed and signed (all signatures real) in ${(signMs / 1000).toFixed(1)} s, written in ${(writeMs / 1000).toFixed(1)} s`);
  console.log(`tree build: ${N.toLocaleString('en')} leaves in ${(buildMs / 1000).toFixed(1)} s (${Math.round(N / (buildMs / 1000)).toLocaleString('en')} leaves/s), incremental over ${ends.length} checkpoints, each signed`);

  // Inclusion proofs of random seals against the latest checkpoint, as GET /v1/ledger/proofs/inclusion computes them.
  const [sealRows] = (await sq.query(`SELECT sequence, seal FROM verdicts WHERE organisation_id = '${ORG}' AND sequence = ANY($1::bigint[])`, {
    bind: [Array.from({ length: 1000 }, () => 1 + Math.floor(rng() * N))],
  })) as [{ sequence: string; seal: string }[], unknown];
  const served: number[] = [];
  const verified: number[] = [];
  for (const r of sealRows) {
    const a = performance.now();
    const p = await proveInclusion(sq, config, ORG, { seal: r.seal });
    served.push(performance.now() - a);
    const root = Buffer.from(p.checkpoint.rootHash, 'hex');
    const hashes = p.proof.hashes.map((h) => Buffer.from(h, 'hex'));
    const b = performance.now();
    const ok = verifyInclusion(p.proof.leafIndex, p.proof.treeSize, leafHash(Buffer.from(r.seal, 'hex')), hashes, root);
    verified.push(performance.now() - b);
    if (!ok) throw new Error(`inclusion proof of ${r.sequence} does not verify`);
  }
  console.log(`inclusion proof served: median ${ms(quantile(served, 0.5))}, p99 ${ms(quantile(served, 0.99))} (${served.length} random seals, ${N.toLocaleString('en')} leaves)`);
  console.log(`inclusion proof verified: median ${ms(quantile(verified, 0.5))}, p99 ${ms(quantile(verified, 0.99))} (RFC 9162 §2.1.3.2)`);

  // Consistency proofs between random pairs of the checkpoints.
  const cps = await checkpointsUpTo(sq, ORG, N);
  const cServed: number[] = [];
  const cVerified: number[] = [];
  for (let i = 0; i < 300; i++) {
    const x = cps[Math.floor(rng() * cps.length)]!;
    const y = cps[Math.floor(rng() * cps.length)]!;
    const [from, to] = x.treeSize <= y.treeSize ? [x, y] : [y, x];
    const a = performance.now();
    const p = await proveConsistency(sq, ORG, { fromSize: from.treeSize, toSize: to.treeSize });
    cServed.push(performance.now() - a);
    const b = performance.now();
    const ok = verifyConsistency(from.treeSize, to.treeSize, Buffer.from(from.rootHash, 'hex'), Buffer.from(to.rootHash, 'hex'), p.proof.hashes.map((h) => Buffer.from(h, 'hex')));
    cVerified.push(performance.now() - b);
    if (!ok) throw new Error(`consistency ${from.treeSize} → ${to.treeSize} does not verify`);
  }
  console.log(`consistency proof served: median ${ms(quantile(cServed, 0.5))}, p99 ${ms(quantile(cServed, 0.99))}; verified: median ${ms(quantile(cVerified, 0.5))} (300 random pairs of ${cps.length} checkpoints)`);

  // The default range check (newest 1 000 against the latest checkpoint).
  const r0 = performance.now();
  const range = await verifyLedgerRange(sq, config, ORG, {});
  console.log(`range check (GET /v1/ledger/verify, newest ${range.verdictsChecked}): ${(performance.now() - r0).toFixed(0)} ms, intact ${range.intact}`);

  // crypto.verify alone, on the same seals and key, beside the full background walk.
  const pub = key.publicKey;
  const sample = sealRows.slice(0, 1000).map((r) => Buffer.from(r.seal, 'hex'));
  const sigsOf = sample.map((s) => sign(null, s, key.privateKey));
  const v0 = performance.now();
  let count = 0;
  while (performance.now() - v0 < 3000) {
    for (let i = 0; i < sample.length; i++) verify(null, sample[i]!, pub, sigsOf[i]!);
    count += sample.length;
  }
  const verifyPerSecond = count / ((performance.now() - v0) / 1000);
  const w0 = performance.now();
  const walk = await startWalk(sq, config, console, ORG);
  await walkEnded(walk.id);
  const walkSeconds = (performance.now() - w0) / 1000;
  const done = await getWalk(sq, ORG, walk.id);
  const walkRate = done.checked / walkSeconds;
  console.log(`full walk: ${done.checked.toLocaleString('en')} verdicts in ${walkSeconds.toFixed(1)} s = ${Math.round(walkRate).toLocaleString('en')} verdicts/s (status ${done.status}, intact ${done.intact})`);
  console.log(`crypto.verify alone: ${Math.round(verifyPerSecond).toLocaleString('en')} signatures/s on one core; walk / verify = ${(walkRate / verifyPerSecond).toFixed(2)}`);
  await db.close();
} finally {
  destroyCluster(cluster);
}
