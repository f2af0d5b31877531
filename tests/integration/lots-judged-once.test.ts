// Issue 16, "One lot, one judgement": a lot code of a product that already has a verdict is refused
// (409 naming the earlier verdict) unless it is that lot's second sample or an explicit re-test
// with a reason, sealed as a re-test of the latest judgement and shown beside it. Two concurrent
// submissions of one new lot code give one verdict; a refused lot stores nothing and is not counted.
import request from 'supertest';
import { QueryTypes } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { flushUsage } from '../../server/metering/usage-buffer.speedup';
import { buildTestApp, createTestKey, createTestOrganisation, testOwnerUrl, type TestApp } from '../support/app';
import { createProduct, lotBody, measurements } from '../support/lots';

let t: TestApp;
let t2: TestApp; // a second app with its own pool and ledger appender: another process, as far as the ledger can tell
let key: string;
let orgId: string;
let product: { id: string; sku: string };

beforeAll(async () => {
  const limits = { ...buildTestApp().ctx.config.rateLimits, perKeyPerMinute: 100_000, perOrganisationPerMinute: 100_000, perIpPerMinute: 100_000 };
  t = buildTestApp({ rateLimits: limits });
  t2 = buildTestApp({ rateLimits: limits });
  const org = await createTestOrganisation('Judged-once packer (test)');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  product = await createProduct(t.app, key, { sku: 'T-ONCE-500' });
});
afterAll(async () => {
  await t.close();
  await t2.close();
});

const auth = () => ({ Authorization: `Bearer ${key}` });
const post = (body: object, app = t.app) => request(app).post('/v1/lots').set(auth()).send(body);

async function sql<T extends object>(text: string, bind: unknown[]): Promise<T[]> {
  return t.ctx.db.sequelize.query<T>(text, { bind, type: QueryTypes.SELECT });
}
const verdictCount = async () => (await sql<{ n: number }>('SELECT count(*)::int AS n FROM verdicts WHERE organisation_id = $1', [orgId]))[0]!.n;
async function lotsCounted(): Promise<number> {
  await flushUsage();
  return (await sql<{ n: number }>('SELECT coalesce(sum(lots), 0)::int AS n FROM usage_daily WHERE organisation_id = $1', [orgId]))[0]!.n;
}

function expectProblem(res: request.Response, status: number, type: string, pointer?: string) {
  expect(res.status, JSON.stringify(res.body)).toBe(status);
  expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
  expect(res.body.type).toBe(`https://lotproof.dev/problems/${type}`);
  if (pointer !== undefined) expect((res.body.errors ?? []).map((e: { pointer: string }) => e.pointer), JSON.stringify(res.body)).toContain(pointer);
}

/** A first sample that asks for a second one. Directive 76/211/EEC Annex II 2.2.1, lot 100–500:
 *  first sample 30, accept ≤ 1, reject ≥ 3 → 2 defectives (below Qn − TNE = 485 g) need a second sample. */
function secondSampleRequiredBody(seed: number, lotCode: string) {
  return { ...lotBody(product.sku, seed), lotCode, lotSize: 400, measurements: [...measurements(seed, 28, 504, 1.5), 480.0, 481.0] };
}

describe('a lot code judged before', () => {
  it('is refused with a 409 naming the earlier verdict (JSON and CSV), stores nothing and counts nothing', async () => {
    const first = await post({ ...lotBody(product.sku, 101), lotCode: 'ONCE-101' });
    expect(first.status, JSON.stringify(first.body)).toBe(201);
    const [before, counted] = [await verdictCount(), await lotsCounted()];

    const again = await post({ ...lotBody(product.sku, 102), lotCode: 'ONCE-101' });
    expectProblem(again, 409, 'lot-already-judged', '/body/lotCode');
    expect(again.body.verdict).toEqual({ id: first.body.id, decision: first.body.decision, href: `/v1/verdicts/${first.body.id}` });
    expect(again.body.detail).toContain(first.body.id);

    const csv = await request(t.app)
      .post(`/v1/lots?sku=${product.sku}&lotCode=ONCE-101&lotSize=2000&testing=non-destructive&measurementUnit=g&measurementBasis=net&column=net_g`)
      .set(auth())
      .set('Content-Type', 'text/csv')
      .send(`net_g\n${measurements(103, 50, 503, 2).join('\n')}\n`);
    expectProblem(csv, 409, 'lot-already-judged', '/query/lotCode');
    expect(csv.body.verdict.id).toBe(first.body.id);

    expect(await verdictCount()).toBe(before);
    expect(await lotsCounted()).toBe(counted);
  });

  it('is a lot of its product only, and compares case-sensitively', async () => {
    const other = await createProduct(t.app, key, { sku: 'T-ONCE-OTHER' });
    expect((await post({ ...lotBody(product.sku, 111), lotCode: 'ONCE-111' })).status).toBe(201);
    expect((await post({ ...lotBody(other.sku, 112), lotCode: 'ONCE-111' })).status).toBe(201);
    expect((await post({ ...lotBody(product.sku, 113), lotCode: 'once-111' })).status).toBe(201);
  });

  it('takes its second sample, and then refuses a fresh first sample naming the second sample (the latest judgement)', async () => {
    const first = await post(secondSampleRequiredBody(121, 'ONCE-121'));
    expect(first.body.decision).toBe('second-sample-required');
    const second = await post({ firstSampleVerdictId: first.body.id, measurementUnit: 'g', measurements: measurements(122, 30, 504, 1.5) });
    expect(second.status, JSON.stringify(second.body)).toBe(201);
    const fresh = await post({ ...lotBody(product.sku, 123), lotCode: 'ONCE-121' });
    expectProblem(fresh, 409, 'lot-already-judged', '/body/lotCode');
    expect(fresh.body.verdict.id).toBe(second.body.id);
  });
});

describe('a re-test', () => {
  it('is sealed as a re-test of the earlier verdict, with the reason, and shown beside it in both directions', async () => {
    const original = await post({ ...lotBody(product.sku, 131), lotCode: 'ONCE-131', measurements: measurements(131, 50, 470, 2) });
    expect(original.status).toBe(201);
    expect(original.body.decision).toBe('nonconforming');
    expect(original.body.retestOf).toBeNull();
    expect(original.body.retestedBy).toBeNull();
    const reason = 'Scale 3 found out of calibration after the first check; re-weighed on scale 1';
    const retest = await post({ ...lotBody(product.sku, 132), lotCode: 'ONCE-131', retest: { of: original.body.id, reason } });
    expect(retest.status, JSON.stringify(retest.body)).toBe(201);
    expect(retest.body.retestOf).toEqual({ verdictId: original.body.id, seal: original.body.seal.value, reason });

    // the sealed record names the earlier verdict by id and seal, and the reason
    const sealed = await request(t.app).get(`/v1/seals/${retest.body.seal.value}`).set(auth());
    expect(sealed.body.document.record.retestOf).toEqual({ verdictId: original.body.id, seal: original.body.seal.value, reason });
    const column = await sql<{ retest_of_verdict_id: string }>('SELECT retest_of_verdict_id FROM verdicts WHERE id = $1', [retest.body.id]);
    expect(column[0]!.retest_of_verdict_id).toBe(original.body.id);

    // the original shows who re-tested it: detail and list
    const detail = await request(t.app).get(`/v1/verdicts/${original.body.id}`).set(auth());
    expect(detail.body.retestedBy).toEqual({ verdictId: retest.body.id, decision: retest.body.decision, reason });
    const list = await request(t.app).get('/v1/verdicts?lotCode=ONCE-131').set(auth());
    const byId = new Map(list.body.items.map((v: { id: string }) => [v.id, v]));
    expect((byId.get(original.body.id) as { retestedBy: { verdictId: string } }).retestedBy.verdictId).toBe(retest.body.id);
    expect((byId.get(retest.body.id) as { retestOf: { verdictId: string } }).retestOf.verdictId).toBe(original.body.id);

    // the CSV export has a column for it
    const exported = await request(t.app).get('/v1/exports/verdicts?format=csv&lotCode=ONCE-131').set(auth());
    expect(exported.status).toBe(200);
    const [header, ...rows] = exported.text.trim().split('\n');
    const at = header!.split(',').indexOf('retest_of_verdict_id');
    expect(at, header).toBeGreaterThanOrEqual(0);
    const retestRow = rows.find((r) => r.startsWith(retest.body.id) || r.includes(retest.body.id))!;
    expect(retestRow.split(',')[at]).toBe(original.body.id);
  });

  it('is taken as CSV with retestOf and retestReason in the query', async () => {
    const original = await post({ ...lotBody(product.sku, 141), lotCode: 'ONCE-141' });
    const reason = 'Customer complaint: re-check';
    const csv = await request(t.app)
      .post(`/v1/lots?sku=${product.sku}&lotCode=ONCE-141&lotSize=2000&testing=non-destructive&measurementUnit=g&measurementBasis=net&column=net_g&retestOf=${original.body.id}&retestReason=${encodeURIComponent(reason)}`)
      .set(auth())
      .set('Content-Type', 'text/csv')
      .send(`net_g\n${measurements(142, 50, 503, 2).join('\n')}\n`);
    expect(csv.status, JSON.stringify(csv.body)).toBe(201);
    expect(csv.body.retestOf).toEqual({ verdictId: original.body.id, seal: original.body.seal.value, reason });
  });

  it('must name the latest judgement of the lot (409 naming the latest), and may not name another lot', async () => {
    const original = await post({ ...lotBody(product.sku, 151), lotCode: 'ONCE-151' });
    const first = await post({ ...lotBody(product.sku, 152), lotCode: 'ONCE-151', retest: { of: original.body.id, reason: 'first re-test' } });
    expect(first.status).toBe(201);
    const before = await verdictCount();
    const stale = await post({ ...lotBody(product.sku, 153), lotCode: 'ONCE-151', retest: { of: original.body.id, reason: 'second re-test of the original' } });
    expectProblem(stale, 409, 'not-latest-judgement', '/body/retest/of');
    expect(stale.body.verdict).toEqual({ id: first.body.id, decision: first.body.decision, href: `/v1/verdicts/${first.body.id}` });
    expect(await verdictCount()).toBe(before);

    const otherLot = await post({ ...lotBody(product.sku, 154), lotCode: 'ONCE-154', retest: { of: first.body.id, reason: 'wrong lot' } });
    expectProblem(otherLot, 422, 'lot-not-judged', '/body/lotCode');
    const unknown = await post({ ...lotBody(product.sku, 155), lotCode: 'ONCE-155', retest: { of: '00000000-0000-4000-8000-000000000000', reason: 'nothing' } });
    expectProblem(unknown, 422, 'lot-not-judged', '/body/retest/of');
    expect(await verdictCount()).toBe(before);
  });

  it('needs a reason of 1 to 500 characters, and is not a second sample at the same time', async () => {
    const original = await post({ ...lotBody(product.sku, 161), lotCode: 'ONCE-161' });
    expectProblem(await post({ ...lotBody(product.sku, 162), lotCode: 'ONCE-161', retest: { of: original.body.id } }), 400, 'validation', '/body/retest/reason');
    expectProblem(await post({ ...lotBody(product.sku, 162), lotCode: 'ONCE-161', retest: { of: original.body.id, reason: '' } }), 400, 'validation', '/body/retest/reason');
    expectProblem(await post({ ...lotBody(product.sku, 162), lotCode: 'ONCE-161', retest: { of: original.body.id, reason: 'x'.repeat(501) } }), 400, 'validation', '/body/retest/reason');
    const both = await post({ firstSampleVerdictId: original.body.id, retest: { of: original.body.id, reason: 'both' }, measurementUnit: 'g', measurements: measurements(163, 30, 504, 1.5) });
    expectProblem(both, 400, 'validation', '/body/retest');
  });

  it('of a verdict awaiting its second sample leaves that first sample closed to a second sample', async () => {
    const first = await post(secondSampleRequiredBody(171, 'ONCE-171'));
    expect(first.body.decision).toBe('second-sample-required');
    const retest = await post({ ...lotBody(product.sku, 172), lotCode: 'ONCE-171', retest: { of: first.body.id, reason: 'sample mixed up with lot 170' } });
    expect(retest.status, JSON.stringify(retest.body)).toBe(201);
    const late = await post({ firstSampleVerdictId: first.body.id, measurementUnit: 'g', measurements: measurements(173, 30, 504, 1.5) });
    expectProblem(late, 409, 'not-latest-judgement', '/body/firstSampleVerdictId');
    expect(late.body.verdict.id).toBe(retest.body.id);
  });
});

describe('concurrent submissions of one new lot code', () => {
  it('give one 201 and 409s for the rest, through two appenders at once; only the verdict stored is counted', async () => {
    const [before, counted] = [await verdictCount(), await lotsCounted()];
    const n = 12;
    const replies = await Promise.all(
      Array.from({ length: n }, (_, i) => post({ ...lotBody(product.sku, 200 + i), lotCode: 'ONCE-RACE' }, i % 2 === 0 ? t.app : t2.app)),
    );
    const statuses = replies.map((r) => r.status).sort();
    expect(statuses, replies.map((r) => r.text.slice(0, 160)).join('\n')).toEqual([201, ...Array(n - 1).fill(409)]);
    const created = replies.find((r) => r.status === 201)!;
    for (const r of replies.filter((x) => x.status === 409)) expect(r.body.verdict.id).toBe(created.body.id);
    expect(await verdictCount()).toBe(before + 1);
    expect(await lotsCounted()).toBe(counted + 1);
  });

  it('concurrent re-tests of one verdict give one re-test', async () => {
    const original = await post({ ...lotBody(product.sku, 301), lotCode: 'ONCE-RACE-RT' });
    const replies = await Promise.all(
      Array.from({ length: 6 }, (_, i) => post({ ...lotBody(product.sku, 310 + i), lotCode: 'ONCE-RACE-RT', retest: { of: original.body.id, reason: `try ${i}` } }, i % 2 ? t.app : t2.app)),
    );
    expect(replies.map((r) => r.status).sort()).toEqual([201, 409, 409, 409, 409, 409]);
  });

  it('the database itself refuses a second first judgement of a lot (the unique index behind the ledger check)', async () => {
    const { Sequelize } = await import('sequelize');
    const owner = new Sequelize(testOwnerUrl(), { logging: false });
    try {
      const original = await post({ ...lotBody(product.sku, 401), lotCode: 'ONCE-INDEX' });
      // A copy of the row at a new position with a made-up seal: only the lot's uniqueness stands in its way.
      const copy = owner.query(
        `INSERT INTO verdicts (id, organisation_id, sequence, seal, previous_seal, signature, kid, record, product_id, product_sku, product_name,
           product_spec, lot_code, line, packed_at, lot_size, testing, measurement_unit, measurement_count, client_reference, source_format,
           decision, result, engine_version, rulebook_id, rulebook_version, recorded_at)
         SELECT gen_random_uuid(), organisation_id, (SELECT max(sequence) + 1 FROM verdicts WHERE organisation_id = $2), encode(sha256(gen_random_uuid()::text::bytea), 'hex'),
           seal, signature, kid, record, product_id, product_sku, product_name, product_spec, lot_code, line, packed_at, lot_size, testing,
           measurement_unit, measurement_count, client_reference, source_format, decision, result, engine_version, rulebook_id, rulebook_version, recorded_at
         FROM verdicts WHERE id = $1`,
        { bind: [original.body.id, orgId] },
      );
      await expect(copy).rejects.toMatchObject({ parent: { code: '23505', constraint: 'verdicts_one_judgement_per_lot' } });
    } finally {
      await owner.close();
    }
  });
});
