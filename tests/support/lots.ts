// Helpers for the verdict and ledger tests: a product and lots with seeded measurements.
import request from 'supertest';
import type { Express } from 'express';
import { packContents, seededRng } from '../../server/demo/random';

export const OATS = {
  sku: 'T-OATS-500',
  name: 'Test oats 500 g',
  nominalQuantity: 500,
  unit: 'g',
  tareMode: 'none',
  rulebook: { id: 'eu-76-211' },
} as const;

/** n pack contents around `mean` from a seeded generator. */
export function measurements(seed: number, n: number, mean: number, sd: number): number[] {
  return packContents(seededRng(seed), n, mean, sd);
}

export async function createProduct(app: Express, key: string, overrides: Record<string, unknown> = {}): Promise<{ id: string; sku: string }> {
  const res = await request(app).post('/v1/products').set('Authorization', `Bearer ${key}`).send({ ...OATS, ...overrides });
  if (res.status !== 201) throw new Error(`product: ${res.status} ${JSON.stringify(res.body)}`);
  return res.body;
}

export function lotBody(sku: string, seed: number, extra: Record<string, unknown> = {}): Record<string, unknown> {
  return {
    sku,
    lotCode: `L-${seed}`,
    line: 'Line A',
    packedAt: '2025-03-01T06:00:00Z',
    lotSize: 2000,
    testing: 'non-destructive',
    measurementUnit: 'g',
    measurementBasis: 'net',
    measurements: measurements(seed, 50, 503, 2),
    ...extra,
  };
}
