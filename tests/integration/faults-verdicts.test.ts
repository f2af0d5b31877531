// Faults of issue 14 in the verdicts area (item 16): a forged cursor on the verdict list must be a
// 400 naming /query/cursor for every sort, and an export or a full ledger walk over a few thousand
// verdicts must never keep /healthz waiting for 100 ms or more.
//
// The app runs in this process, so work that holds the event loop delays this test's own /healthz
// probe by as long (see watchWhile for what is measured, and why).
import { randomUUID } from 'node:crypto';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, listenOnLoopback, type TestApp } from '../support/app';
import { createProduct, lotBody, measurements } from '../support/lots';
import { describeWatch, loopWatch } from '../support/loop-watch';
import type { Principal } from '../../server/core/principal';
import { submitLot } from '../../server/verdicts/lot-submission';
import type { LotSubmission } from '../../server/verdicts/lot-submission';

const VERDICTS = 2_000;

let t: TestApp;
let server: { url: string; close: () => Promise<void> };
let key: string;
let orgId: string;

const auth = () => ({ Authorization: `Bearer ${key}` });

beforeAll(async () => {
  t = buildTestApp();
  server = await listenOnLoopback(t.app);
  const org = await createTestOrganisation('Verdicts fault packer');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  const product = await createProduct(t.app, key);
  // Warm up the routes measured below (the validator compiles a route's schemas on its first call).
  for (const path of ['/v1/exports/verdicts?format=csv', '/v1/exports/verdicts?format=ndjson', '/v1/ledger/verify']) await readAll(path);
  // A few thousand verdicts, sealed in the ledger like any other; straight through the lot
  // submission (no HTTP) so that the file stays well within a minute.
  const principal = { organisationId: org.id, kind: 'api-key', scopes: ['lots:submit'] } as unknown as Principal;
  let next = 0;
  const submitter = async () => {
    while (next < VERDICTS) {
      const i = next++;
      const sub = lotBody(product.sku, 5_000 + i, { lotCode: `L-F-${i}`, measurements: measurements(5_000 + i, 50, i % 10 === 0 ? 494 : 503, 2) });
      await submitLot(t.ctx.db.sequelize, t.ctx.config, principal, { sub: sub as unknown as LotSubmission, source: { format: 'json' } }, null);
    }
  };
  await Promise.all(Array.from({ length: 32 }, submitter));
}, 60_000);

afterAll(async () => {
  await server?.close();
  await t?.close();
});
const { call, watchWhile } = loopWatch(() => server.url);

async function readAll(path: string): Promise<{ status: number; bytes: number; text: string }> {
  return call('GET', path, auth(), !path.includes('ndjson'));
}

describe('item 16: exports and a full ledger walk leave /healthz answering within 100 ms', () => {
  it('(the machine at rest: /healthz alone, for comparison)', async () => {
    const w = await watchWhile(() => new Promise((r) => setTimeout(r, 1_000)));
    console.log(`at rest: ${describeWatch(w)}`);
  });

  for (const [name, path] of [
    ['CSV export', '/v1/exports/verdicts?format=csv'],
    ['NDJSON export', '/v1/exports/verdicts?format=ndjson'],
    ['full ledger walk', '/v1/ledger/verify'],
  ] as const) {
    it(`${name} of ${VERDICTS} verdicts`, async () => {
      const t0 = performance.now();
      const w = await watchWhile(() => readAll(path));
      const result = w.result;
      console.log(`${name}: ${result.bytes} bytes in ${(performance.now() - t0).toFixed(0)} ms; ${describeWatch(w)}`);
      expect(result.status, result.text.slice(0, 300)).toBe(200);
      if (path.includes('csv')) expect(result.text.trim().split('\r\n').length).toBe(VERDICTS + 1);
      if (path.includes('ndjson')) expect(result.bytes).toBeGreaterThan(VERDICTS * 1000);
      // The ledger check covers the newest 1 000 positions up to a fresh checkpoint (a full walk is a background job).
      if (path.includes('ledger')) expect(JSON.parse(result.text)).toMatchObject({ intact: true, verdictsChecked: 1000, from: VERDICTS - 999, to: VERDICTS });
      expect(w.healthz.length).toBeGreaterThan(2);
      expect(w.holdMs, 'the longest the server held the event loop').toBeLessThan(100);
    }, 30_000);
  }
});

describe('the CSV export, read in parts', () => {
  it('shows the mean, standard deviation, unit and nominal quantity of each stored verdict as before', async () => {
    const csv = await readAll('/v1/exports/verdicts?format=csv');
    const rows = csv.text.trim().split('\r\n').slice(1).map((l) => l.split(','));
    const [stored] = await t.ctx.db.sequelize.query(
      'SELECT sequence, result, product_spec FROM verdicts WHERE organisation_id = $1 ORDER BY sequence',
      { bind: [orgId] },
    );
    const expected = (stored as { sequence: string; result: { statistics: { descriptive: { mean?: number; standardDeviation?: number | null } } }; product_spec: { unit: string; nominalQuantity: number } }[]).map((r) => {
      const d = r.result.statistics.descriptive;
      return [String(r.sequence), ...[d.mean, d.standardDeviation, r.product_spec.unit, r.product_spec.nominalQuantity].map((v) => (v === null || v === undefined ? '' : String(v)))];
    });
    expect(rows.map((r) => [r[0], r[12], r[13], r[14], r[15]])).toEqual(expected);
  });
});

describe('item 16: a forged verdict-list cursor is a 400 naming /query/cursor, never a 500', () => {
  const b64 = (v: unknown) => Buffer.from(typeof v === 'string' ? v : JSON.stringify(v)).toString('base64url');
  const SORTS = ['recordedAt', '-recordedAt', 'lotCode', '-lotCode', 'decision', '-decision', 'packedAt', '-packedAt'];

  /** Cursors no sort ever returned: not base64 JSON, the wrong shape, wrong types, numbers out of range. */
  function forged(sort: string): string[] {
    const ts = '2025-03-01T06:00:00+00:00';
    return [
      'garbage',
      '!!!',
      b64('null'),
      b64({ sort }),
      b64([]),
      b64([sort, 1, ts]),
      b64([sort, 1, ts, 5, 'extra']),
      b64([sort === '-recordedAt' ? 'recordedAt' : '-recordedAt', 1, ts, 5]),
      b64([sort, 2, ts, 5]),
      b64([sort, '1', ts, 5]),
      b64([sort, 1, 12345, 5]),
      b64([sort, 1, ts, '5']),
      b64([sort, 1, ts, 1e300]),
      b64([sort, 1, ts, 2.5]),
      b64([sort, 1, ts, 2 ** 53]),
      b64([sort, 1, ts, -1e20]),
      b64([sort, 1, `${ts}\u0000`, 5]),
      b64([sort, 1, null, 5]),
      b64([null, null, null, null]),
      ...(sort.endsWith('edAt') || sort.endsWith('packedAt')
        ? [
            b64([sort, 1, 'yesterday', 5]),
            b64([sort, 1, '0000-01-01T00:00:00+00:00', 5]),
            b64([sort, 1, '2025-02-30T00:00:00+00:00', 5]),
            b64([sort, 1, '2025-03-01T24:00:00+00:00', 5]),
            b64([sort, 1, '99999-03-01T06:00:00+00:00', 5]),
            b64([sort, 1, '2025-03-01T06:00:00+99:00', 5]),
            b64([sort, 1, '2025-03-01T06:00:00', 5]),
            b64([sort, 1, '', 5]),
          ]
        : []),
      ...(sort.endsWith('packedAt') ? [] : [b64([sort, 0, '', 5])]),
    ];
  }

  it('every sort refuses every forged cursor with a 400 at /query/cursor', async () => {
    let checked = 0;
    for (const sort of SORTS) {
      for (const cursor of forged(sort)) {
        const res = await request(t.app).get('/v1/verdicts').query({ sort, cursor, limit: 5 }).set(auth());
        const what = `sort ${sort}, cursor ${Buffer.from(cursor, 'base64url').toString('utf8')}`;
        expect(res.status, `${what}: ${res.text.slice(0, 300)}`).toBe(400);
        expect(((res.body.errors ?? []) as { pointer: string }[]).map((e) => e.pointer), what).toContain('/query/cursor');
        checked++;
      }
    }
    expect(checked).toBeGreaterThan(150);
  });

  it('a cursor of odd but well-typed values is answered without a server error', async () => {
    for (const sort of SORTS) {
      for (const c of [
        [sort, 1, 'zzzz\ud800', -5],
        [sort, 1, 'LOT-\u{1F33E}', Number.MAX_SAFE_INTEGER],
        [sort, 1, '9999-12-31T23:59:59.999999-15:59', 1],
        [sort, 1, '0001-01-01T00:00:00+15:59', 1],
        [sort, 0, '', 0],
        [sort, 1, randomUUID(), 1],
      ]) {
        const res = await request(t.app).get('/v1/verdicts').query({ sort, cursor: b64(c), limit: 5 }).set(auth());
        expect(res.status, `sort ${sort}, cursor ${JSON.stringify(c)}: ${res.text.slice(0, 300)}`).toBeLessThan(500);
        if (res.status === 400) expect(((res.body.errors ?? []) as { pointer: string }[]).map((e) => e.pointer)).toContain('/query/cursor');
      }
    }
  });
});
