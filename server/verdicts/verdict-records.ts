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

export const RECORD_FORMAT = 'lotproof.verdict-record/1';
export const DOCUMENT_FORMAT = 'lotproof.sealed-verdict/1';

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
  decision: VerdictView['decision'];
  result: VerdictView['result'];
  engine_version: string;
  rulebook_id: string;
  rulebook_version: string;
  recorded_at: Date | string;
}

/** The columns a view needs; read FROM verdicts unaliased (the re-test columns refer to it by name). */
export const VIEW_COLUMNS = `id, organisation_id, sequence, seal, previous_seal, signature, kid, product_id, product_sku, product_name,
  product_spec, lot_code, line, packed_at, lot_size, testing, measurement_unit, measurement_count, client_reference, source_format,
  first_sample_verdict_id, retest_of_verdict_id, retest_reason, submitted_by, decision, result, engine_version, rulebook_id, rulebook_version, recorded_at,
  (SELECT o.seal FROM verdicts o WHERE o.id = verdicts.retest_of_verdict_id) AS retest_of_seal,
  (SELECT json_build_object('verdictId', r.id, 'decision', r.decision, 'reason', r.retest_reason) FROM verdicts r
     WHERE r.retest_of_verdict_id = verdicts.id AND r.organisation_id = verdicts.organisation_id) AS retested_by`;

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

/** The exported document: canonical JSON itself, so any changed byte is detectable offline. */
export function sealedDocumentText(row: Pick<VerdictRow, 'seal' | 'signature' | 'kid'> & { record: string }): string {
  // The record text is already canonical; splice it in rather than re-serialising a large lot.
  // Keys in RFC 8785 order: format, kid, record, seal, signature.
  return `{"format":${JSON.stringify(DOCUMENT_FORMAT)},"kid":${canonicalJson(row.kid)},"record":${row.record},"seal":${canonicalJson(row.seal)},"signature":${canonicalJson(row.signature)}}`;
}
