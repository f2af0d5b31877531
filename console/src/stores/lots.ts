// Submitting a lot by hand: the JSON body of submitLot, sent with XMLHttpRequest so the page can
// show how much of a large lot has gone up. One idempotency key per submission, so a retry after
// a lost reply returns the same sealed verdict instead of sealing the lot twice.
import { defineStore } from 'pinia';
import { upload } from '../api/upload';
import { api, call, idempotencyKey } from '../api/client';
import type { components } from '../../../shared/api/schema';
import type { PreviousSample } from '../lib/preview';

export type LotSubmission = components['schemas']['LotSubmission'];
type Verdict = components['schemas']['Verdict'];

/** Verdicts of one product listed for a lot code (the form picks the exact lot code among them). */
const LOOKUP_LIMIT = 100;

export const useLotsStore = defineStore('lots', () => {
  async function submit(body: LotSubmission, key: string, onProgress: (fraction: number) => void): Promise<Verdict> {
    return upload<Verdict>({
      url: '/v1/lots',
      body: JSON.stringify(body),
      contentType: 'application/json',
      headers: { 'Idempotency-Key': key },
      onProgress,
    });
  }
  /** The product's verdicts under this lot code, newest first: has the lot been judged before? */
  async function judgementsOf(productId: string, lotCode: string): Promise<Verdict[]> {
    const res = await call(api.GET('/v1/verdicts', { params: { query: { productId, lotCode, limit: LOOKUP_LIMIT } } }));
    return res.items;
  }
  /** One verdict (to prefill the form from a verdict page). */
  async function verdict(id: string): Promise<Verdict> {
    return call(api.GET('/v1/verdicts/{verdictId}', { params: { path: { verdictId: id } } }));
  }
  /** A first sample's spec and lot as sealed (its record's input), which its second sample is judged with. */
  async function sealedInput(id: string): Promise<PreviousSample> {
    const doc = await call(api.GET('/v1/verdicts/{verdictId}/export', { params: { path: { verdictId: id } } }));
    return (doc.record as { input: PreviousSample }).input;
  }
  return { submit, judgementsOf, verdict, sealedInput, newKey: idempotencyKey };
});
