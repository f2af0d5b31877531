// Server-side sorting of the verdict list: every sort pages through every verdict exactly once,
// in order (keyset on the sort key and the ledger sequence), with ties and missing packed-at
// times; an unknown sort or a cursor from another sort is a 400 problem naming the parameter.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createProduct, lotBody, measurements } from '../support/lots';

let t: TestApp;
let key: string;
let otherKey: string;
type V = { id: string; decision: string; recordedAt: string; lot: { lotCode: string; packedAt: string | null }; seal: { sequence: number } };
let all: V[] = [];

// Lot codes of one shape (so every collation orders them alike), some repeated to force ties.
const LOTS: { code: string; packedAt: string | null; short?: boolean }[] = [
  { code: 'LOT-C', packedAt: '2025-03-02T06:00:00Z' },
  { code: 'LOT-A', packedAt: null },
  { code: 'LOT-B', packedAt: '2025-03-01T06:00:00Z', short: true },
  { code: 'LOT-A', packedAt: '2025-03-02T06:00:00Z' },
  { code: 'LOT-E', packedAt: null, short: true },
  { code: 'LOT-D', packedAt: '2025-02-27T18:30:00Z' },
  { code: 'LOT-C', packedAt: '2025-03-01T06:00:00Z' },
  { code: 'LOT-F', packedAt: '2025-03-03T06:00:00Z', short: true },
  { code: 'LOT-B', packedAt: null },
  { code: 'LOT-G', packedAt: '2025-03-02T06:00:00Z' },
  { code: 'LOT-A', packedAt: '2025-02-28T06:00:00Z' },
];

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Sorting test packer');
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write']);
  const product = await createProduct(t.app, key);
  const judged = new Map<string, string>();
  for (const [i, l] of LOTS.entries()) {
    const body = lotBody(product.sku, 100 + i, { lotCode: l.code, packedAt: l.packedAt ?? undefined });
    // a lot is judged once (issue 16): its second verdict is a re-test of the first
    const earlier = judged.get(l.code);
    if (earlier) body.retest = { of: earlier, reason: 'sorting test: one lot code, two verdicts' };
    if (l.packedAt === null) delete body.packedAt;
    if (l.short) body.measurements = measurements(100 + i, 50, 494, 2);
    const res = await request(t.app).post('/v1/lots').set('Authorization', `Bearer ${key}`).send(body);
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    judged.set(l.code, res.body.id);
    all.push(res.body);
  }
  // Another organisation's verdicts never appear in the list.
  const other = await createTestOrganisation('Sorting neighbour');
  otherKey = await createTestKey(other.id, ['lots:submit', 'verdicts:read', 'products:write']);
  const p2 = await createProduct(t.app, otherKey);
  const res = await request(t.app).post('/v1/lots').set('Authorization', `Bearer ${otherKey}`).send(lotBody(p2.sku, 999, { lotCode: 'LOT-A' }));
  expect(res.status).toBe(201);
});
afterAll(() => t.close());

async function pageThrough(sort: string | undefined, limit: number): Promise<V[]> {
  const seen: V[] = [];
  let cursor: string | null = null;
  for (let guard = 0; guard < 100; guard++) {
    const query: Record<string, string | number> = { limit };
    if (sort) query.sort = sort;
    if (cursor) query.cursor = cursor;
    const res = await request(t.app).get('/v1/verdicts').query(query).set('Authorization', `Bearer ${key}`);
    expect(res.status, JSON.stringify(res.body)).toBe(200);
    expect(res.body.items.length).toBeLessThanOrEqual(limit);
    seen.push(...res.body.items);
    cursor = res.body.nextCursor;
    if (!cursor) return seen;
  }
  throw new Error('paging did not end');
}

type Key = (v: V) => string | null;
const keys: Record<string, Key> = {
  recordedAt: (v) => v.recordedAt,
  lotCode: (v) => v.lot.lotCode,
  decision: (v) => v.decision,
  packedAt: (v) => v.lot.packedAt,
};

/** The order the API promises: by key (NULL last either way), ties by sequence in the same direction. */
function expected(sort: string): V[] {
  const desc = sort.startsWith('-');
  const key = keys[desc ? sort.slice(1) : sort]!;
  const sign = desc ? -1 : 1;
  return [...all].sort((a, b) => {
    const ka = key(a);
    const kb = key(b);
    if (ka !== kb) {
      if (ka === null) return 1;
      if (kb === null) return -1;
      return sign * (ka < kb ? -1 : 1);
    }
    return sign * (a.seal.sequence - b.seal.sequence);
  });
}

describe('sorting the verdict list', () => {
  const sorts = ['recordedAt', '-recordedAt', 'lotCode', '-lotCode', 'decision', '-decision', 'packedAt', '-packedAt'];
  for (const sort of sorts) {
    for (const limit of [1, 3, 50]) {
      it(`sort=${sort}, limit ${limit}: every verdict exactly once, in order`, async () => {
        const seen = await pageThrough(sort, limit);
        expect(seen.map((v) => v.id)).toEqual(expected(sort).map((v) => v.id));
        expect(new Set(seen.map((v) => v.id)).size).toBe(all.length);
      });
    }
  }

  it('is newest first without a sort, as -recordedAt', async () => {
    const seen = await pageThrough(undefined, 4);
    expect(seen.map((v) => v.id)).toEqual(expected('-recordedAt').map((v) => v.id));
  });

  it('sorts within the filters', async () => {
    const seen = (await request(t.app).get('/v1/verdicts').query({ lotCode: 'LOT-A', sort: '-packedAt' }).set('Authorization', `Bearer ${key}`))
      .body.items as V[];
    expect(seen.map((v) => v.id)).toEqual(expected('-packedAt').filter((v) => v.lot.lotCode === 'LOT-A').map((v) => v.id));
    expect(seen.at(-1)!.lot.packedAt).toBeNull();
  });

  it('refuses an unknown sort with a 400 problem naming /query/sort', async () => {
    for (const sort of ['sequence', 'lotcode', '--lotCode', 'lotCode,decision', '']) {
      const res = await request(t.app).get('/v1/verdicts').query({ sort }).set('Authorization', `Bearer ${key}`);
      expect(res.status, `${sort}: ${JSON.stringify(res.body)}`).toBe(400);
      expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
      expect(res.body.errors.map((e: { pointer: string }) => e.pointer)).toContain('/query/sort');
    }
  });

  it('refuses a cursor from another sort, or a forged one, with a 400 naming /query/cursor', async () => {
    const first = await request(t.app).get('/v1/verdicts').query({ sort: 'lotCode', limit: 2 }).set('Authorization', `Bearer ${key}`);
    expect(first.body.nextCursor).toBeTruthy();
    const c = (parts: unknown[]) => Buffer.from(JSON.stringify(parts)).toString('base64url');
    const cases: [string, string][] = [
      ['-lotCode', first.body.nextCursor], // another sort's cursor
      ['recordedAt', c(['recordedAt', 1, 'not a time', 1])],
      ['packedAt', c(['packedAt', 1, '2025-02-30T06:00:00+00:00', 1])],
      ['lotCode', c(['lotCode', 0, '', 1])], // lot codes are never missing
      ['lotCode', c(['lotCode', 1, 'LOT-\u0000', 1])],
      ['lotCode', c(['lotCode', 1, 'LOT-A', 1.5])],
      ['lotCode', 'bm90IGpzb24'],
    ];
    for (const [sort, cursor] of cases) {
      const res = await request(t.app).get('/v1/verdicts').query({ sort, cursor }).set('Authorization', `Bearer ${key}`);
      expect(res.status, `${sort} ${cursor}: ${JSON.stringify(res.body)}`).toBe(400);
      expect(res.body.errors.map((e: { pointer: string }) => e.pointer)).toContain('/query/cursor');
    }
  });
});
