// `npm run bench:list`: how the verdict list's first page is read for each sort order, with 200 000
// verdicts in one organisation (rows written directly by SQL: plan and time only, not sealed
// verdicts). Prints PostgreSQL's plan and execution time per order; it is not a timed test.
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { openDatabase } from '../../server/db/database';
import { migrate } from '../../server/db/migrate';
import { ensureDebianPackages } from '../../server/platform/debian-packages';
import { destroyCluster, freePort, startCluster } from '../../server/platform/embedded-postgres';
ensureDebianPackages(['postgresql']);
const cluster = startCluster({ dir: mkdtempSync(join(tmpdir(), 'lp-sort-')), port: await freePort(), database: 'x' });
try {
  const db = openDatabase(cluster.url); await migrate(db.sequelize);
  const q = (s: string) => db.sequelize.query(s);
  await q(`INSERT INTO organisations (id, name, slug) VALUES ('00000000-0000-4000-8000-000000000001', 'Bench packer (list)', 'bench-list')`);
  await q(`INSERT INTO products (id, organisation_id, sku, name, nominal_quantity, unit, tare_mode, rulebook) VALUES ('00000000-0000-4000-8000-000000000002', '00000000-0000-4000-8000-000000000001', 'S', 'S', 500, 'g', 'none', '{"id":"eu-76-211"}')`);
  await q(`INSERT INTO verdicts (id, organisation_id, sequence, seal, previous_seal, signature, kid, record, product_id, product_sku, product_name, product_spec, lot_code, line, packed_at, lot_size, testing, measurement_unit, measurement_count, client_reference, source_format, first_sample_verdict_id, decision, result, engine_version, rulebook_id, rulebook_version, recorded_at)
    SELECT gen_random_uuid(), '00000000-0000-4000-8000-000000000001', g, encode(sha256(g::text::bytea), 'hex'), CASE WHEN g = 1 THEN NULL ELSE encode(sha256((g-1)::text::bytea), 'hex') END, 's', 'k', '{}', '00000000-0000-4000-8000-000000000002', 'S', 'S', '{}', 'L-' || (random()*100000)::int, 'line', CASE WHEN g % 7 = 0 THEN NULL ELSE now() - (random() * interval '300 days') END, 1000, 'destructive', 'g', 50, NULL, 'json', NULL, (ARRAY['conforming','nonconforming','second-sample-required'])[1 + g % 3], '{}', '1', 'eu-76-211', '1', now() - ((200000 - g) * interval '1 minute')
    FROM generate_series(1, 200000) g`);
  await q('ANALYZE verdicts');
  for (const [col, dir, nulls] of [['recorded_at', 'DESC', ''], ['recorded_at', 'ASC', ''], ['lot_code', 'ASC', ''], ['decision', 'DESC', ''], ['packed_at', 'DESC', ' NULLS LAST'], ['packed_at', 'ASC', ' NULLS LAST']]) {
    const [rows] = await q(`EXPLAIN (ANALYZE, FORMAT JSON) SELECT id FROM verdicts WHERE organisation_id = '00000000-0000-4000-8000-000000000001' ORDER BY ${col} ${dir}${nulls}, sequence ${dir} LIMIT 51`) as any;
    const plan = rows[0]['QUERY PLAN'][0];
    const node = (p: any): string => p.Plans ? `${p['Node Type']}${p['Index Name'] ? ` ${p['Index Name']}` : ''} > ${node(p.Plans[0])}` : `${p['Node Type']}${p['Index Name'] ? ` ${p['Index Name']}` : ''}`;
    console.log(`${col} ${dir}${nulls}: ${plan['Execution Time'].toFixed(2)} ms  ${node(plan.Plan)}`);
  }
  await db.close();
} finally { destroyCluster(cluster); }
