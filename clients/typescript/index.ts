// Lotproof TypeScript client for machine callers (MES, ERP, scripts): openapi-fetch over the types
// generated from openapi/ (shared/api/schema.ts), with the API key as a bearer token. Every call
// returns { data, error, response }; `error` is the RFC 9457 problem body.
//
//   const lp = createLotproofClient({ baseUrl: 'https://lotproof.example', apiKey: process.env.LOTPROOF_KEY! });
//   const { data, error } = await lp.POST('/v1/lots', { body: lot, params: { header: { 'Idempotency-Key': lot.lotCode } } });
import createClient, { type Client } from 'openapi-fetch';
import type { components, paths } from '../../shared/api/schema';

export type LotproofClient = Client<paths>;
export type Verdict = components['schemas']['Verdict'];
export type LotSubmission = components['schemas']['LotSubmission'];
export type Problem = components['schemas']['Problem'];

export interface LotproofClientOptions {
  baseUrl: string;
  apiKey: string;
  fetch?: typeof fetch;
}

export function createLotproofClient(opts: LotproofClientOptions): LotproofClient {
  return createClient<paths>({
    baseUrl: opts.baseUrl.replace(/\/$/, ''),
    headers: { Authorization: `Bearer ${opts.apiKey}` },
    ...(opts.fetch ? { fetch: opts.fetch } : {}),
  });
}

/** Submits a lot with an Idempotency-Key (default: the lot code), so a retry never makes a second verdict. */
export async function submitLot(client: LotproofClient, lot: LotSubmission, idempotencyKey = lot.lotCode): Promise<Verdict> {
  const { data, error, response } = await client.POST('/v1/lots', {
    body: lot,
    params: { header: idempotencyKey ? { 'Idempotency-Key': idempotencyKey } : {} },
  });
  if (error || !data) throw Object.assign(new Error((error as Problem | undefined)?.detail ?? `HTTP ${response.status}`), { problem: error, status: response.status });
  return data;
}
