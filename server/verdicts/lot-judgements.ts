// One lot, one judgement. A lot is (organisation, product, lot code), and lot codes compare exactly
// as given (case and spaces count: "L-7" and "l-7 " are other lots), as they always have. A lot's
// verdicts form a line: its first judgement, then each later one names the latest before it — a
// second sample its first sample, a re-test (with a reason) the verdict it re-tests. A fresh first
// sample of a lot judged before is refused, naming the lot's latest judgement. The rule runs twice:
// here before judging (a refused lot costs no engine work) and in the ledger under the chain lock
// (two concurrent submissions of one lot give one verdict); migration 0205's unique indexes back it.
import type { Sequelize } from 'sequelize';
import { Conflict, Refused, type FieldIssue } from '../core/errors';
import { preparedRows } from '../db/raw';

/** The latest judgement of a lot. */
export interface LotHead {
  id: string;
  decision: string;
  first_sample_verdict_id: string | null;
}

/** What a submission asks of its lot: a first judgement, a second sample, or a re-test. */
export interface LotClaim {
  lotCode: string;
  firstSampleId: string | null;
  retestOf: string | null;
}

const LATEST =
  'SELECT id, decision, first_sample_verdict_id FROM verdicts WHERE organisation_id = $1 AND product_id = $2 AND lot_code = $3 ORDER BY sequence DESC LIMIT 1';

export async function latestJudgement(sequelize: Sequelize, organisationId: string, productId: string, lotCode: string): Promise<LotHead | null> {
  const [row] = await preparedRows<LotHead>(sequelize, 'lotproof-lot-latest', LATEST, [organisationId, productId, lotCode]);
  return row ?? null;
}

/** The verdict a re-test names: it must be of this product and lot (fields are the submission's). */
export interface RetestTarget {
  id: string;
  seal: string;
}

const RETEST_TARGET = 'SELECT id, seal, product_id, product_sku, lot_code FROM verdicts WHERE id = $1 AND organisation_id = $2';

export async function loadRetestTarget(
  sequelize: Sequelize,
  organisationId: string,
  of: string,
  product: { id: string; sku: string },
  lotCode: string,
): Promise<RetestTarget> {
  const [row] = await preparedRows<{ id: string; seal: string; product_id: string; product_sku: string; lot_code: string }>(
    sequelize,
    'lotproof-retest-target',
    RETEST_TARGET,
    [of, organisationId],
  );
  if (!row) throw new Refused('lot-not-judged', `no verdict ${of} in your organisation to re-test`, [{ field: '/retest/of', detail: 'unknown verdict' }]);
  if (row.product_id !== product.id) {
    const detail = `verdict ${of} is of product ${JSON.stringify(row.product_sku)}, not ${JSON.stringify(product.sku)}`;
    throw new Refused('lot-not-judged', `a re-test is of the same product and lot: ${detail}`, [{ field: '/retest/of', detail }]);
  }
  if (row.lot_code !== lotCode) {
    const detail = `verdict ${of} is of lot ${JSON.stringify(row.lot_code)}; a re-test is of the same lot`;
    throw new Refused('lot-not-judged', detail, [{ field: '/lotCode', detail }]);
  }
  return { id: row.id, seal: row.seal };
}

/** The 409 members that name a verdict: its id, decision and where to read it. */
function named(head: LotHead): Record<string, unknown> {
  return { verdict: { id: head.id, decision: head.decision, href: `/v1/verdicts/${head.id}` } };
}

/** The refusal a submission meets, given the lot's latest judgement; null when it may be judged. */
export function lotRefusal(claim: LotClaim, latest: LotHead | null): Conflict | null {
  if (!latest) return null; // (a second sample or re-test always finds its lot: the verdict it names is of it)
  const lot = JSON.stringify(claim.lotCode);
  if (claim.firstSampleId !== null) {
    if (latest.id === claim.firstSampleId) return null;
    if (latest.first_sample_verdict_id === claim.firstSampleId) {
      const detail = `verdict ${claim.firstSampleId} already has its second sample, verdict ${latest.id} (${latest.decision}); a first sample takes one second sample`;
      return new Conflict(detail, 'second-sample-exists', [{ field: '/firstSampleVerdictId', detail }], named(latest));
    }
    const detail = `lot ${lot} was judged again after verdict ${claim.firstSampleId}: its latest judgement is verdict ${latest.id} (${latest.decision})`;
    return new Conflict(detail, 'not-latest-judgement', [{ field: '/firstSampleVerdictId', detail }], named(latest));
  }
  if (claim.retestOf !== null) {
    if (latest.id === claim.retestOf) return null;
    const detail = `a re-test names the lot's latest judgement: lot ${lot} was judged again after verdict ${claim.retestOf}, latest verdict ${latest.id} (${latest.decision})`;
    return new Conflict(detail, 'not-latest-judgement', [{ field: '/retest/of', detail }], named(latest));
  }
  const detail =
    `lot ${lot} of this product was judged before: verdict ${latest.id} (${latest.decision}). ` +
    (latest.decision === 'second-sample-required'
      ? `Submit its second sample (firstSampleVerdictId: ${latest.id}), or a re-test with a reason (retest: { of: ${latest.id}, reason })`
      : `A lot is judged once; to judge it again, submit a re-test with a reason (retest: { of: ${latest.id}, reason })`);
  const fields: FieldIssue[] = [{ field: '/lotCode', detail: `already judged: verdict ${latest.id}` }];
  return new Conflict(detail, 'lot-already-judged', fields, named(latest));
}
