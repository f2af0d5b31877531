// Assembling a judged lot into what the ledger seals: the record's content (what the seal covers)
// as canonical parts, and the row's columns. The ledger adds the chain position and the seal.
import { ENGINE_VERSION, type LotInput, type Verdict as EngineVerdict } from '../../shared/engine';
import type { IdempotencyClaim } from '../core/idempotency';
import type { PendingVerdict } from './ledger';
import type { LotProduct } from './lot-product';
import type { PlausibilityRecord } from '../../shared/plausibility';
import type { Submitter } from './lot-submitter';
import type { FirstSample } from './second-sample';
import { canonicalContentParts, RECORD_FORMAT, type RecordContent, type VerdictRecord } from './verdict-records';

export interface JudgedLot {
  verdictId: string;
  organisationId: string;
  product: LotProduct;
  input: LotInput;
  lotCode: string;
  /** The lot's own facts as submitted (a second sample inherits what it leaves out from its first). */
  line: string | null;
  packedAt: string | null;
  clientReference: string | null;
  source: VerdictRecord['lot']['source'];
  /** The first sample this lot completes (only what the record names of it). */
  first: Pick<FirstSample, 'id' | 'seal'> | null;
  /** The lot's latest judgement this one re-tests, and why. */
  retest: { id: string; seal: string; reason: string } | null;
  submittedBy: Submitter | null;
  plausibility: PlausibilityRecord | null;
  result: EngineVerdict;
}

/** The verdict ready to be sealed. */
export function assembleVerdict(j: JudgedLot, claim: IdempotencyClaim | null): PendingVerdict {
  const { input, result, product, first } = j;
  const { lot } = input;
  const content: RecordContent = {
    format: RECORD_FORMAT,
    verdictId: j.verdictId,
    organisation: { id: j.organisationId, name: product.organisation_name },
    product: { id: product.id, sku: product.sku, name: product.name },
    lot: { lotCode: j.lotCode, line: j.line, packedAt: j.packedAt, clientReference: j.clientReference, source: j.source },
    firstSample: first ? { verdictId: first.id, seal: first.seal } : null,
    retestOf: j.retest ? { verdictId: j.retest.id, seal: j.retest.seal, reason: j.retest.reason } : null,
    submittedBy: j.submittedBy,
    plausibility: j.plausibility,
    input,
    engine: { version: ENGINE_VERSION },
    rulebook: { id: result.rulebook.id, version: result.rulebook.version },
    result,
  };
  return {
    verdictId: j.verdictId,
    organisationId: j.organisationId,
    parts: canonicalContentParts(content),
    row: {
      id: j.verdictId,
      organisation_id: j.organisationId,
      product_id: product.id,
      product_sku: product.sku,
      product_name: product.name,
      product_spec: input.product as never,
      lot_code: j.lotCode,
      line: j.line,
      packed_at: j.packedAt,
      lot_size: lot.lotSize,
      testing: lot.testing,
      measurement_unit: lot.measurementUnit,
      measurement_count: lot.measurements.length,
      client_reference: j.clientReference,
      source_format: j.source.format,
      first_sample_verdict_id: first ? first.id : null,
      retest_of_verdict_id: j.retest ? j.retest.id : null,
      retest_reason: j.retest ? j.retest.reason : null,
      submitted_by: j.submittedBy,
      retest_of_seal: j.retest ? j.retest.seal : null,
      retested_by: null,
      decision: result.decision,
      result: result as never,
      engine_version: ENGINE_VERSION,
      rulebook_id: result.rulebook.id,
      rulebook_version: result.rulebook.version,
    },
    idempotency: claim,
    alertRecipients: product.alert_recipients ?? [],
  };
}
