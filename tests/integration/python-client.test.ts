// The Python client in clients/python, driven by python3 against the real server over HTTP:
// submit with an idempotency key (a retry returns the same verdict), page the list, look up the
// seal, walk the ledger, and get a LotproofProblem naming the bad field.
import { execFile } from 'node:child_process';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, listenOnLoopback, type TestApp } from '../support/app';
import { createProduct, lotBody } from '../support/lots';

const run = promisify(execFile);
let t: TestApp;
let server: { url: string; close: () => Promise<void> };
let baseUrl: string;
let key: string;
let sku: string;

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Python packer');
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  sku = (await createProduct(t.app, key)).sku;
  server = await listenOnLoopback(t.app);
  baseUrl = server.url;
});
afterAll(async () => {
  await server.close();
  await t.close();
});

const SCRIPT = `
import json, sys
from lotproof import LotproofClient, LotproofProblem
base, key, lots = sys.argv[1], sys.argv[2], json.loads(sys.argv[3])
lp = LotproofClient(base, key)
out = {}
first = lp.submit_lot(lots[0], idempotency_key="py-" + lots[0]["lotCode"])
again = lp.submit_lot(lots[0], idempotency_key="py-" + lots[0]["lotCode"])
lp.submit_lot(lots[1])
lp.submit_lot(lots[2])
out["same"] = first["id"] == again["id"]
out["decision"] = first["decision"]
out["listed"] = [v["lot"]["lotCode"] for v in lp.verdicts(limit=2)]
out["bySeal"] = first["id"] in json.dumps(lp.get_seal(first["seal"]["value"]))
out["ledger"] = lp.verify_ledger()
try:
    lp.submit_lot(dict(lots[0], measurements=[500.2, -1, 499.7]))
except LotproofProblem as p:
    out["problem"] = {"status": p.status, "pointers": [e["pointer"] for e in p.errors]}
print(json.dumps(out))
`;

describe('clients/python', () => {
  it('submits, retries safely, pages, looks up the seal, walks the ledger and raises problems', async () => {
    const lots = [lotBody(sku, 7001), lotBody(sku, 7002), lotBody(sku, 7003)];
    const { stdout } = await run('python3', ['-c', SCRIPT, baseUrl, key, JSON.stringify(lots)], {
      env: { ...process.env, PYTHONPATH: join(process.cwd(), 'clients', 'python') },
    });
    const out = JSON.parse(stdout);
    expect(out.same).toBe(true);
    expect(out.decision).toBe('conforming');
    expect(out.listed).toHaveLength(3); // two pages of at most 2, followed by the client
    expect(new Set(out.listed)).toEqual(new Set(['L-7001', 'L-7002', 'L-7003']));
    expect(out.bySeal).toBe(true);
    expect(out.ledger).toMatchObject({ intact: true, verdictsChecked: 3, firstBreak: null });
    expect(out.problem.status).toBeGreaterThanOrEqual(400);
    expect(out.problem.status).toBeLessThan(500);
    expect(out.problem.pointers.join(' ')).toMatch(/measurements\/1/);
  });
});
