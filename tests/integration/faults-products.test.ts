// Faults of issue 14 in the products area: rulebook params of any size copied into every verdict
// (item 9), a forged list cursor answered with a 500 (16), and alert recipients that make the server
// an open mail relay (16). Each case first failed on the code before its fix.
import { randomUUID } from 'node:crypto';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { User } from '../../server/models';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createUser } from '../../server/identity/users';
import { TEST_PASSWORD } from '../support/identity';
import { OATS } from '../support/lots';

let t: TestApp;
let key: string;
let orgId: string;
let member: string;
let outsider: string;

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Products fault packer');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write']);
  member = (await userAt(org.id, 'faults-packer.test')).email;
  const other = await createTestOrganisation('Products fault neighbour');
  outsider = (await userAt(other.id, 'neighbour-packer.test')).email;
}, 60_000);
afterAll(() => t.close());

/**
 * A user under a .test name (RFC 2606 §2: reserved for testing). Unlike .example and .invalid,
 * which reach no one and are always taken as recipients, a .test address must be a member's.
 */
function userAt(organisationId: string, domain: string): Promise<User> {
  return createUser({ organisationId, email: `quality-${randomUUID().slice(0, 12)}@${domain}`, role: 'quality', password: TEST_PASSWORD });
}

const auth = () => ({ Authorization: `Bearer ${key}` });
const sku = () => `T-F-${randomUUID().slice(0, 8)}`;
const product = (extra: Record<string, unknown> = {}) => ({ ...OATS, sku: sku(), ...extra });

function pointersOf(res: request.Response): string[] {
  return ((res.body?.errors ?? []) as { pointer: string }[]).map((e) => e.pointer);
}

function expectProblem(res: request.Response, status: number, pointer: string | RegExp): void {
  expect(res.status, res.text.slice(0, 400)).toBe(status);
  expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
  const pointers = pointersOf(res);
  expect(pointers.some((p) => (typeof pointer === 'string' ? p === pointer : pointer.test(p))), `${JSON.stringify(pointers)} names ${pointer}`).toBe(true);
}

async function productCount(): Promise<number> {
  const [rows] = await t.ctx.db.sequelize.query('SELECT count(*)::int AS n FROM products WHERE organisation_id = $1', { bind: [orgId] });
  return (rows as { n: number }[])[0]!.n;
}

describe('item 9: rulebook params are only what the chosen rulebook takes, bounded in size', () => {
  it('8 MB of params never makes a product: refused (413 at the door, or a 400 naming the params), nothing stored', async () => {
    const before = await productCount();
    const big = 'x'.repeat(8 * 1024 * 1024);
    for (const params of [{ nonDestructivePlan: 'double', notes: big }, { nonDestructivePlan: big }]) {
      const res = await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'eu-76-211', params } }));
      // Since the small-body limit of item 2 the body is refused before it is read (413); without
      // it, the schema refuses the params (400), as the next case shows within that limit.
      expect([400, 413], res.text.slice(0, 300)).toContain(res.status);
      if (res.status === 400) expect(pointersOf(res).some((p) => p.startsWith('/body/rulebook/params/'))).toBe(true);
    }
    expect(await productCount()).toBe(before);
  }, 40_000);

  it('params of any size within the body limit: an unknown one, an oversized known one, thousands of keys are 400s naming /body/rulebook/params/…; nothing stored', async () => {
    const before = await productCount();
    const big = 'x'.repeat(60_000);
    let res = await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'eu-76-211', params: { nonDestructivePlan: 'double', notes: big } } }));
    expectProblem(res, 400, '/body/rulebook/params/notes');
    res = await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'eu-76-211', params: { nonDestructivePlan: big } } }));
    expectProblem(res, 400, '/body/rulebook/params/nonDestructivePlan');
    const many: Record<string, number> = {};
    for (let i = 0; i < 3_000; i++) many[`k${i}`] = i;
    res = await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'custom', params: many } }));
    expectProblem(res, 400, /^\/body\/rulebook\/params\//);
    expect(await productCount()).toBe(before);
  });

  it("each rulebook takes only its own params: another rulebook's, an unknown one, a nested extra field are 400s naming it", async () => {
    const cases: [Record<string, unknown>, string][] = [
      [{ id: 'eu-76-211', params: { alpha: 0.05 } }, '/body/rulebook/params/alpha'],
      [{ id: 'oiml-r87-2016', params: { nonDestructivePlan: 'single' } }, '/body/rulebook/params/nonDestructivePlan'],
      [{ id: 'custom', params: { nonDestructivePlan: 'single' } }, '/body/rulebook/params/nonDestructivePlan'],
      [{ id: 'custom', params: { lowerLimit: { value: 480, allowed: 2, note: 'x' } } }, '/body/rulebook/params/lowerLimit/note'],
      [{ id: 'custom', params: { alpha: 'five percent' } }, '/body/rulebook/params/alpha'],
      [{ id: 'custom', params: { alternative: 'y'.repeat(5000) } }, '/body/rulebook/params/alternative'],
      [{ id: 'custom', params: { upperLimit: { value: [1, 2, 3], allowed: 1 } } }, '/body/rulebook/params/upperLimit/value'],
    ];
    for (const [rulebook, pointer] of cases) {
      const res = await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook }));
      expectProblem(res, 400, pointer);
    }
    // and the same through a change
    const p = await request(t.app).post('/v1/products').set(auth()).send(product());
    expect(p.status, p.text).toBe(201);
    const patched = await request(t.app).patch(`/v1/products/${p.body.id}`).set(auth()).send({ rulebook: { id: 'eu-76-211', params: { notes: 'z'.repeat(50_000) } } });
    expectProblem(patched, 400, '/body/rulebook/params/notes');
  });

  it('normal params are still taken, and a wrong value of a known one is still the engine’s 422', async () => {
    const good: Record<string, unknown>[] = [
      { id: 'eu-76-211' },
      { id: 'eu-76-211', params: {} },
      { id: 'eu-76-211', params: { nonDestructivePlan: 'single' } },
      { id: 'oiml-r87-2016' },
      { id: 'oiml-r87-2016', params: {} },
      { id: 'custom' },
      {
        id: 'custom',
        params: {
          alpha: 0.01,
          alternative: 'two-sided',
          hypothesisedMean: 501,
          knownStandardDeviation: 2.5,
          lowerLimit: { value: 485, allowed: 2 },
          upperLimit: { value: 520, allowed: 0 },
          minimumSampleSize: 10,
        },
      },
    ];
    for (const rulebook of good) {
      const res = await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook }));
      expect(res.status, `${JSON.stringify(rulebook)}: ${res.text.slice(0, 300)}`).toBe(201);
      expect(res.body.rulebook.id).toBe(rulebook.id);
      if (rulebook.params && Object.keys(rulebook.params).length > 0) expect(res.body.rulebook.params).toEqual(rulebook.params);
    }
    const wrong = await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'custom', params: { alpha: 1.5 } } }));
    expectProblem(wrong, 422, '/body/rulebook/params/alpha');
  });
});

describe('item 16: a forged products cursor is a 400 naming /query/cursor, never a 500', () => {
  const b64 = (v: unknown) => Buffer.from(typeof v === 'string' ? v : JSON.stringify(v)).toString('base64url');
  const cursors = [
    'garbage',
    '!!!',
    b64('not json'),
    b64({ a: 1 }),
    b64([]),
    b64(['x']),
    b64(['not a date', randomUUID()]),
    b64(['2025-01-01T00:00:00.000Z', 'not-a-uuid']),
    b64(['2025-01-01T00:00:00.000Z', 7]),
    b64([1e300, randomUUID()]),
    b64([-8.64e15, randomUUID()]),
    b64([0, randomUUID()]),
    b64(['+275760-09-13T00:00:00.000Z', randomUUID()]),
    b64(['0000-01-01T00:00:00.000Z', randomUUID()]),
    b64(['2025-02-30T00:00:00.000Z', randomUUID()]),
    b64(['2025-01-01T00:00:00.000Z', `${randomUUID()}\u0000`]),
    b64(['2025-01-01T00:00:00.000Z', randomUUID(), 'extra']),
    b64([null, null]),
    b64(['2025-01-01', randomUUID()]),
    b64(['9'.repeat(60), randomUUID()]),
  ];

  it('every garbage cursor gets a 400 at /query/cursor', async () => {
    for (const cursor of cursors) {
      const res = await request(t.app).get(`/v1/products?cursor=${encodeURIComponent(cursor)}`).set(auth());
      expect(res.status, `cursor ${cursor} (${Buffer.from(cursor, 'base64url').toString('utf8')}): ${res.text.slice(0, 300)}`).toBe(400);
      expect(pointersOf(res), cursor).toContain('/query/cursor');
    }
  });

  it('a cursor this API returned still pages through every product once', async () => {
    const all = new Set<string>();
    let cursor: string | null = null;
    let pages = 0;
    do {
      const res: request.Response = await request(t.app).get(`/v1/products?limit=2${cursor ? `&cursor=${encodeURIComponent(cursor)}` : ''}`).set(auth());
      expect(res.status, res.text).toBe(200);
      for (const p of res.body.items as { id: string }[]) {
        expect(all.has(p.id)).toBe(false);
        all.add(p.id);
      }
      cursor = res.body.nextCursor;
      pages++;
    } while (cursor && pages < 100);
    expect(all.size).toBe(await productCount());
  });
});

describe('item 16: alert recipients are people of the organisation, not any address', () => {
  it('takes the address of a user of the organisation, in any case', async () => {
    const res = await request(t.app).post('/v1/products').set(auth()).send(product({ alertRecipients: [member.toUpperCase()] }));
    expect(res.status, res.text).toBe(201);
    expect(res.body.alertRecipients).toEqual([member]);
  });

  it('refuses an address outside the organisation with a 422 naming /body/alertRecipients/<i>; stores nothing', async () => {
    const before = await productCount();
    for (const [list, i] of [
      [[member, 'someone@relay-target.test'], 1],
      [[outsider], 0],
      [[member, member.replace('@', '+x@')], 1],
    ] as [string[], number][]) {
      const res = await request(t.app).post('/v1/products').set(auth()).send(product({ alertRecipients: list }));
      expectProblem(res, 422, `/body/alertRecipients/${i}`);
    }
    expect(await productCount()).toBe(before);
    const p = await request(t.app).post('/v1/products').set(auth()).send(product({ alertRecipients: [member] }));
    const patched = await request(t.app).patch(`/v1/products/${p.body.id}`).set(auth()).send({ alertRecipients: [member, 'list@relay-target.test'] });
    expectProblem(patched, 422, '/body/alertRecipients/1');
    const again = await request(t.app).get(`/v1/products/${p.body.id}`).set(auth());
    expect(again.body.alertRecipients).toEqual([member]);
  });

  it('refuses the address of a user who was removed', async () => {
    const gone = await userAt(orgId, 'faults-packer.test');
    await User.update({ removedAt: new Date() }, { where: { id: gone.id } });
    const res = await request(t.app).post('/v1/products').set(auth()).send(product({ alertRecipients: [gone.email] }));
    expectProblem(res, 422, '/body/alertRecipients/0');
  });

  it('takes an address under .example or .invalid (RFC 2606 §2), which no mail can reach, as the docs and the demo use them', async () => {
    const res = await request(t.app).post('/v1/products').set(auth()).send(product({ alertRecipients: ['quality@fernhill.example', 'qa@plant.invalid', member] }));
    expect(res.status, res.text).toBe(201);
    const test = await request(t.app).post('/v1/products').set(auth()).send(product({ alertRecipients: ['qa@plant.test'] }));
    expectProblem(test, 422, '/body/alertRecipients/0');
  });
});
