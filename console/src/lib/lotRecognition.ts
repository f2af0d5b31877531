// A lot code the form is given may name a lot judged before (the server refuses a fresh first
// sample of it: one lot, one judgement). The form looks the lot up by product and lot code and
// offers what the server takes instead: the lot's second sample, when its latest verdict asks for
// one, or a re-test of its latest verdict with a reason. Lot codes compare exactly, as the server
// compares them (case and spaces count).
import type { components } from '../../../shared/api/schema';

type Verdict = components['schemas']['Verdict'];

/** What a submission of this lot is: a first sample, its second sample, or a re-test of its latest verdict. */
export type LotMode = 'first' | 'second-sample' | 'retest';

/** The lot's latest judgement, as the form shows it, and what it may be sent as. */
export interface KnownLot {
  /** The lot's latest verdict (recordedAt null when only a refusal named it). */
  latest: Pick<Verdict, 'id' | 'decision'> & { recordedAt: string | null; lotCode: string };
  /** Packs the plan asks for in the second sample, when the latest verdict awaits one. */
  secondSamplePacks: number | null;
  offers: LotMode[];
}

/** The latest judgement of exactly this lot code among verdicts listed for the product (newest first or not), or null. */
export function knownLot(lotCode: string, listed: readonly Verdict[]): KnownLot | null {
  const same = listed.filter((v) => v.lot.lotCode === lotCode);
  if (same.length === 0) return null;
  // the latest judgement is the last sealed: the highest position in the ledger
  const latest = same.reduce((a, b) => (b.seal.sequence > a.seal.sequence ? b : a));
  const awaiting = latest.decision === 'second-sample-required';
  return {
    latest: { id: latest.id, decision: latest.decision, recordedAt: latest.recordedAt, lotCode: latest.lot.lotCode },
    secondSamplePacks: awaiting ? (latest.result.secondSample?.additionalPacks ?? null) : null,
    offers: awaiting ? ['second-sample', 'retest'] : ['retest'],
  };
}

/** Re-test reasons the server takes: 1 to 500 characters (LotSubmission.retest.reason). */
export function retestReasonProblem(reason: string): string | null {
  const r = reason.trim();
  if (r.length === 0) return 'Say why the lot is judged again: the reason is sealed with the re-test.';
  if (r.length > 500) return `The reason is ${r.length} characters; at most 500 are kept.`;
  return null;
}

/**
 * The known lot a 409 `lot-already-judged` names (`verdict: { id, decision, href }`), for a form
 * whose own look-up had not found it yet (typed and sent at once, or judged meanwhile elsewhere).
 */
export function knownLotFromConflict(problem: { type?: string; verdict?: unknown }, lotCode: string): KnownLot | null {
  if (!problem.type?.endsWith('/lot-already-judged')) return null;
  const v = problem.verdict as { id?: unknown; decision?: unknown } | undefined;
  if (!v || typeof v.id !== 'string' || typeof v.decision !== 'string') return null;
  const decision = v.decision as Verdict['decision'];
  const awaiting = decision === 'second-sample-required';
  return { latest: { id: v.id, decision, recordedAt: null, lotCode }, secondSamplePacks: null, offers: awaiting ? ['second-sample', 'retest'] : ['retest'] };
}
