// The TypeScript client in clients/typescript, used the way a plant system would: over real HTTP.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createLotproofClient, submitLot, type LotSubmission } from '../../clients/typescript';
import { buildTestApp, createTestKey, createTestOrganisation, listenOnLoopback, type TestApp } from '../support/app';
import { createProduct, lotBody } from '../support/lots';

let t: TestApp;
let server: { url: string; close: () => Promise<void> };
let baseUrl: string;
let key: string;
let sku: string;

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Client packer');
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write']);
  sku = (await createProduct(t.app, key)).sku;
  server = await listenOnLoopback(t.app);
  baseUrl = server.url;
});
afterAll(async () => {
  await server.close();
  await t.close();
});

describe('clients/typescript', () => {
  it('submits a lot once even when retried, and finds the verdict by its seal', async () => {
    const lp = createLotproofClient({ baseUrl, apiKey: key });
    const lot = lotBody(sku, 4242) as unknown as LotSubmission;
    const first = await submitLot(lp, lot);
    const retry = await submitLot(lp, lot);
    expect(retry.id).toBe(first.id);
    expect(first.decision).toBe('conforming');
    const seal = (first as unknown as { seal: { value: string } }).seal.value;
    expect(seal).toMatch(/^[0-9a-f]{64}$/);
    const found = await lp.GET('/v1/seals/{seal}', { params: { path: { seal } } });
    expect(found.response.status).toBe(200);
    expect(JSON.stringify(found.data)).toContain(first.id);
  });

  it('throws with the problem details when the API refuses a lot', async () => {
    const lp = createLotproofClient({ baseUrl, apiKey: key });
    const bad = { ...lotBody(sku, 4243), measurements: [501.2, -3, 499.8] } as unknown as LotSubmission;
    await expect(submitLot(lp, bad)).rejects.toMatchObject({ status: expect.any(Number), problem: { status: expect.any(Number) } });
    const err = await submitLot(lp, bad).catch((e: { status: number; problem: { errors?: Array<{ pointer: string }> } }) => e);
    expect((err as { status: number }).status).toBeGreaterThanOrEqual(400);
    expect((err as { status: number }).status).toBeLessThan(500);
  });
});
