// The shapes of a verdict: the sealed record (what the seal covers), the stored row, the API view
// and the exported sealed document. One place builds each, so a reply, a replay, a read and an
// export all agree.
import type { LotInput, Verdict as EngineVerdict } from '../../shared/engine';
import type { components } from '../../shared/api/schema';
import { canonicalJson, canonicalJsonBytes, joinPieces } from './canonical';
import type { PlausibilityRecord } from '../../shared/plausibility';
import type { Submitter } from './lot-submitter';

export type VerdictView = components['schemas']['Verdict'];
export type SealedDocument = components['schemas']['SealedDocument'];

export type WithdrawalView = components['schemas']['Withdrawal'];

export const RECORD_FORMAT = 'lotproof.verdict-record/1';
export const DOCUMENT_FORMAT = 'lotproof.sealed-verdict/1';
/** A withdrawal (issue 16) is a record of its own in the same chain, sealed and signed like a verdict's. */
export const WITHDRAWAL_RECORD_FORMAT = 'lotproof.withdrawal-record/1';
export const WITHDRAWAL_DOCUMENT_FORMAT = 'lotproof.sealed-withdrawal/1';

/**
 * The record a withdrawal's seal covers (RFC 8785 canonical JSON, SHA-256): which verdict it
 * withdraws (by id, seal and position), who withdrew it and why. The verdict's own record and row
 * never change; a verdict is withdrawn when a withdrawal names it.
 */
export interface WithdrawalRecord {
  format: typeof WITHDRAWAL_RECORD_FORMAT;
  withdrawalId: string;
  organisation: { id: string; name: string };
  sequence: number;
  previousSeal: string;
  recordedAt: string;
  verdict: { id: string; seal: string; sequence: number; lotCode: string; product: { id: string; sku: string }; decision: string };
  reason: string;
  /** A console user or an API key, as a verdict's submittedBy names them (never a secret). */
  withdrawnBy: Submitter;
}

/** The record a seal covers (RFC 8785 canonical JSON of this object, SHA-256). */
export interface VerdictRecord {
  format: typeof RECORD_FORMAT;
  verdictId: string;
  organisation: { id: string; name: string };
  sequence: number;
  previousSeal: string | null;
  recordedAt: string;
  product: { id: string; sku: string; name: string };
  lot: {
    lotCode: string;
    line: string | null;
    packedAt: string | null;
    clientReference: string | null;
    source:
      | { format: 'json' }
      | {
          format: 'csv';
          sha256: string;
          column: string;
          tareColumn: string | null;
          /** What the CSV reader (shared/csv/lot-csv.ts) found or was told, and the blank rows it skipped (issue 16; absent before). */
          delimiter?: 'comma' | 'semicolon' | 'tab' | null;
          decimal?: 'point' | 'comma' | null;
          rowsRead?: number;
          blankLines?: { count: number; lines: number[] };
        };
  };
  firstSample: { verdictId: string; seal: string } | null;
  /** The judgement of the same lot this one re-tests (the lot's latest before it), and why. Absent
   *  from records sealed before issue 16, like `submittedBy` and `plausibility`. */
  retestOf?: { verdictId: string; seal: string; reason: string } | null;
  /** Who submitted the lot: a console user or an API key (never a secret). */
  submittedBy?: Submitter | null;
  /** The plausibility check of this sample's packs, and whether the submitter confirmed packs outside the band. */
  plausibility?: PlausibilityRecord | null;
  /** Exactly what the engine was given: the product spec as judged and the lot data as submitted. */
  input: LotInput;
  engine: { version: string };
  rulebook: { id: string; version: string };
  result: EngineVerdict;
}

/** Fields of the record fixed before the chain position is known. */
export type RecordContent = Omit<VerdictRecord, 'sequence' | 'previousSeal' | 'recordedAt'>;

/** The chain fields, set under the organisation's chain lock. */
export interface ChainPosition {
  sequence: number;
  previousSeal: string | null;
  recordedAt: string;
}

/**
 * Canonical JSON (UTF-8 bytes) of every content field, computed once outside the chain lock;
 * `assembleRecord` adds the chain fields under the lock without re-serialising a large lot.
 */
export function canonicalContentParts(content: RecordContent): Map<string, Buffer> {
  const parts = new Map<string, Buffer>();
  for (const [k, v] of Object.entries(content)) parts.set(k, canonicalJsonBytes(v));
  return parts;
}

/** The record's canonical JSON as UTF-8 bytes: what the seal hashes and the ledger stores. */
export function assembleRecord(parts: Map<string, Buffer>, chain: ChainPosition): Buffer {
  const all = new Map<string, string | Buffer>(parts);
  all.set('sequence', canonicalJson(chain.sequence));
  all.set('previousSeal', canonicalJson(chain.previousSeal));
  all.set('recordedAt', canonicalJson(chain.recordedAt));
  const keys = [...all.keys()].sort();
  const pieces: (string | Buffer)[] = ['{'];
  keys.forEach((k, i) => {
    pieces.push((i > 0 ? ',' : '') + JSON.stringify(k) + ':', all.get(k)!);
  });
  pieces.push('}');
  return joinPieces(pieces);
}

/** A verdicts row as read back (the columns the views need; `record` only when asked for). */
export interface VerdictRow {
  id: string;
  organisation_id: string;
  sequence: string | number;
  seal: string;
  previous_seal: string | null;
  signature: string;
  kid: string;
  record?: string;
  product_id: string;
  product_sku: string;
  product_name: string;
  product_spec: VerdictView['product']['spec'];
  lot_code: string;
  line: string | null;
  packed_at: Date | string | null;
  lot_size: number;
  testing: 'destructive' | 'non-destructive';
  measurement_unit: VerdictView['lot']['measurementUnit'];
  measurement_count: number;
  client_reference: string | null;
  source_format: 'json' | 'csv';
  first_sample_verdict_id: string | null;
  retest_of_verdict_id: string | null;
  retest_reason: string | null;
  submitted_by: Submitter | null;
  /** Read, not stored: the seal of the verdict re-tested, and the verdict that re-tests this one. */
  retest_of_seal?: string | null;
  retested_by?: { verdictId: string; decision: VerdictView['decision']; reason: string } | null;
  /** Read, not stored: the withdrawal that names this verdict (verdict_withdrawals), if any. */
  withdrawal?: WithdrawalRow | null;
  decision: VerdictView['decision'];
  result: VerdictView['result'];
  engine_version: string;
  rulebook_id: string;
  rulebook_version: string;
  recorded_at: Date | string;
}

/** A verdict's withdrawal as the views read it (the summary, not the record). */
export interface WithdrawalRow {
  id: string;
  reason: string;
  withdrawnBy: Submitter;
  recordedAt: string;
  seal: string;
  sequence: number;
}

/** The withdrawal of the verdict in `verdicts` (unaliased), as JSON, or NULL: a lookup, never a flag on the sealed row. */
export const WITHDRAWAL_COLUMN = `(SELECT json_build_object('id', w.id, 'reason', w.reason, 'withdrawnBy', w.withdrawn_by,
     'recordedAt', to_json(w.recorded_at), 'seal', w.seal, 'sequence', w.sequence)
   FROM verdict_withdrawals w WHERE w.verdict_id = verdicts.id AND w.organisation_id = verdicts.organisation_id) AS withdrawal`;

/** The columns a view needs; read FROM verdicts unaliased (the re-test columns refer to it by name). */
export const VIEW_COLUMNS = `id, organisation_id, sequence, seal, previous_seal, signature, kid, product_id, product_sku, product_name,
  product_spec, lot_code, line, packed_at, lot_size, testing, measurement_unit, measurement_count, client_reference, source_format,
  first_sample_verdict_id, retest_of_verdict_id, retest_reason, submitted_by, decision, result, engine_version, rulebook_id, rulebook_version, recorded_at,
  (SELECT o.seal FROM verdicts o WHERE o.id = verdicts.retest_of_verdict_id) AS retest_of_seal,
  (SELECT json_build_object('verdictId', r.id, 'decision', r.decision, 'reason', r.retest_reason) FROM verdicts r
     WHERE r.retest_of_verdict_id = verdicts.id AND r.organisation_id = verdicts.organisation_id) AS retested_by,
  ${WITHDRAWAL_COLUMN}`;

function iso(d: Date | string | null): string | null {
  if (d === null) return null;
  return (d instanceof Date ? d : new Date(d)).toISOString();
}

export function verdictView(row: VerdictRow): VerdictView {
  return {
    id: row.id,
    decision: row.decision,
    product: { id: row.product_id, sku: row.product_sku, name: row.product_name, spec: row.product_spec },
    lot: {
      lotCode: row.lot_code,
      line: row.line,
      packedAt: iso(row.packed_at),
      lotSize: row.lot_size,
      testing: row.testing,
      measurementUnit: row.measurement_unit,
      measurementCount: row.measurement_count,
      clientReference: row.client_reference,
      sourceFormat: row.source_format,
    },
    firstSampleVerdictId: row.first_sample_verdict_id,
    retestOf: row.retest_of_verdict_id ? { verdictId: row.retest_of_verdict_id, seal: row.retest_of_seal ?? '', reason: row.retest_reason ?? '' } : null,
    retestedBy: row.retested_by ?? null,
    submittedBy: row.submitted_by ?? null,
    withdrawal: row.withdrawal ? withdrawalSummary(row.withdrawal) : null,
    result: row.result,
    recordedAt: iso(row.recorded_at)!,
    seal: {
      value: row.seal,
      algorithm: 'SHA-256',
      canonicalization: 'RFC 8785',
      signature: row.signature,
      signatureAlgorithm: 'Ed25519',
      kid: row.kid,
      sequence: Number(row.sequence),
      previousSeal: row.previous_seal,
    },
    caution: row.result.caution,
  };
}

/** A verdict's withdrawal as its view shows it. */
export function withdrawalSummary(w: WithdrawalRow): NonNullable<VerdictView['withdrawal']> {
  return { id: w.id, reason: w.reason, withdrawnBy: w.withdrawnBy, recordedAt: iso(w.recordedAt)!, seal: w.seal, sequence: Number(w.sequence) };
}

/** The reply to a withdrawal: the sealed withdrawal, as the record says it. */
export function withdrawalView(r: WithdrawalRecord, seal: { value: string; signature: string; kid: string }): WithdrawalView {
  return {
    id: r.withdrawalId,
    verdictId: r.verdict.id,
    verdictSeal: r.verdict.seal,
    reason: r.reason,
    withdrawnBy: r.withdrawnBy,
    recordedAt: r.recordedAt,
    seal: {
      value: seal.value,
      algorithm: 'SHA-256',
      canonicalization: 'RFC 8785',
      signature: seal.signature,
      signatureAlgorithm: 'Ed25519',
      kid: seal.kid,
      sequence: r.sequence,
      previousSeal: r.previousSeal,
    },
  };
}

/** The exported document: canonical JSON itself, so any changed byte is detectable offline. */
export function sealedDocumentText(row: Pick<VerdictRow, 'seal' | 'signature' | 'kid'> & { record: string }): string {
  // The record text is already canonical; splice it in rather than re-serialising a large lot.
  // Keys in RFC 8785 order: format, kid, record, seal, signature.
  return sealedText(DOCUMENT_FORMAT, row);
}

/** A withdrawal's exported document: the same five members, with its own format. */
export function sealedWithdrawalText(row: Pick<VerdictRow, 'seal' | 'signature' | 'kid'> & { record: string }): string {
  return sealedText(WITHDRAWAL_DOCUMENT_FORMAT, row);
}

function sealedText(format: string, row: Pick<VerdictRow, 'seal' | 'signature' | 'kid'> & { record: string }): string {
  return `{"format":${JSON.stringify(format)},"kid":${canonicalJson(row.kid)},"record":${row.record},"seal":${canonicalJson(row.seal)},"signature":${canonicalJson(row.signature)}}`;
}
