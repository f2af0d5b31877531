// Exports: CSV (one summary row per verdict, for spreadsheets) and NDJSON v2 (a header naming a
// signed checkpoint, then one sealed document a line with its inclusion proof in that checkpoint, for
// the offline verifier; clients/verifier/FORMAT.md). Oldest first, streamed page by page, in chunks
// of about 64 KiB, giving other requests a turn at least every 10 ms of work so /healthz and lots are
// never held up. The proofs of a page are computed together, from one read of the tree's nodes.
import { setImmediate as nextTurn } from 'node:timers/promises';
import { QueryTypes, type Sequelize } from 'sequelize';
import type { Config } from '../config';
import { InvalidInput, Refused } from '../core/errors';
import type { Principal } from '../core/principal';
import { checkpointAt, type Checkpoint } from '../ledger/checkpoints';
import { ensureCheckpoint } from '../ledger/issue';
import { inclusionProofs, type InclusionProof } from '../ledger/proofs';
import { canonicalJson } from './canonical';
import { checkRanges, filterSql, type VerdictFilter } from './stored-verdicts';
import { sealedDocumentText, sealedWithdrawalText, WITHDRAWAL_COLUMN, type VerdictRow, type WithdrawalRow } from './verdict-records';

export const EXPORT_FORMAT = 'lotproof.export/2';

const CSV_COLUMNS = [
  'sequence', 'verdict_id', 'recorded_at', 'product_sku', 'product_name', 'lot_code', 'line', 'packed_at', 'lot_size', 'testing',
  'measurement_count', 'decision', 'mean', 'standard_deviation', 'unit', 'nominal_quantity', 'rulebook', 'engine_version',
  'first_sample_verdict_id', 'retest_of_verdict_id', 'retest_reason', 'submitted_by', 'seal', 'previous_seal',
  'withdrawal_id', 'withdrawn_at', 'withdrawal_reason',
] as const;

/** Who submitted a verdict, in one CSV field: the user's e-mail, or the key's name and visible prefix. */
function submitterText(s: VerdictRow['submitted_by']): string | null {
  if (!s) return null;
  return s.kind === 'user' ? s.email : `API key ${s.name} (${s.prefix})`;
}

/** RFC 4180 field; a leading = + - @ is prefixed with ' so spreadsheets do not run it as a formula. */
function csvField(v: unknown): string {
  if (v === null || v === undefined) return '';
  let s = v instanceof Date ? v.toISOString() : String(v);
  if (/^[=+\-@\t\r]/.test(s) && typeof v === 'string') s = `'${s}`;
  return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

/** The parts of the stored result and spec a CSV row shows (null when absent). */
interface CsvNumbers {
  mean: number | null;
  standard_deviation: number | null;
  unit: string | null;
  nominal_quantity: number | null;
}

/**
 * Records larger than this (in bytes, or characters when read) are read and sent in slices of this
 * many characters: decoding a whole 7 MB record (a lot of a million measurements) into one string
 * held the event loop for 60–120 ms; a slice costs a few milliseconds.
 */
const RECORD_SLICE_CHARS = 512 * 1024;

/** A stored record's text, slice by slice (verdict rows never change, so the slices are of one record). */
async function* recordSlices(sequelize: Sequelize, organisationId: string, sequence: number): AsyncGenerator<string> {
  for (let from = 1; ; from += RECORD_SLICE_CHARS) {
    const [slice] = await sequelize.query<{ part: string }>(
      'SELECT substr(record, $3, $4) AS part FROM verdicts WHERE organisation_id = $1 AND sequence = $2',
      { bind: [organisationId, sequence, from, RECORD_SLICE_CHARS], type: QueryTypes.SELECT },
    );
    const part = slice?.part ?? '';
    if (part) yield part;
    if (part.length < RECORD_SLICE_CHARS) return;
  }
}

/** Text gathered before it is handed on as one chunk (fewer, larger writes than a row each). */
const CHUNK_CHARS = 64 * 1024;
/** Work done without a break before other requests get a turn. */
const SLICE_MS = 10;

/** The NDJSON header line (FORMAT.md, "NDJSON export"), canonical JSON. */
function exportHeader(checkpoint: Checkpoint, filter: Record<string, string> | null, from: number): string {
  return canonicalJson({
    checkpoint,
    complete: filter === null,
    filter,
    format: EXPORT_FORMAT,
    from,
    organisationId: checkpoint.organisationId,
    to: checkpoint.treeSize,
  });
}

/** The filters applied, by name, or null when none is. */
function appliedFilter(filter: VerdictFilter): Record<string, string> | null {
  const applied = Object.fromEntries(Object.entries(filter).filter(([, v]) => typeof v === 'string')) as Record<string, string>;
  return Object.keys(applied).length > 0 ? applied : null;
}

/** The sealed document (a verdict's or a withdrawal's) with its inclusion proof, as canonical JSON ("inclusion" sorts between "format" and "kid"). */
function withInclusion(documentText: string, proof: InclusionProof): string {
  const inclusion = `"inclusion":{"hashes":${JSON.stringify(proof.hashes)},"leafIndex":${proof.leafIndex},"treeSize":${proof.treeSize}},`;
  const at = documentText.indexOf(',"kid":') + 1; // right after the format member, which comes first
  return documentText.slice(0, at) + inclusion + documentText.slice(at);
}

export interface ExportOptions {
  /** NDJSON: export only positions after this pinned checkpoint's tree size. */
  fromSize?: number;
}

export async function* exportVerdicts(
  sequelize: Sequelize,
  config: Pick<Config, 'dataDir' | 'verdicts'>,
  principal: Principal,
  format: 'csv' | 'ndjson',
  filter: VerdictFilter,
  options: ExportOptions = {},
): AsyncGenerator<string> {
  checkRanges(filter);
  const { where, bind } = filterSql(principal.organisationId, filter);
  let after = 0;
  // NDJSON: positions up to the checkpoint the proofs are against, issued first when the chain grew.
  let upTo = Number.MAX_SAFE_INTEGER;
  let checkpoint: Checkpoint | null = null;
  if (format === 'csv') yield CSV_COLUMNS.join(',') + '\r\n';
  else {
    checkpoint = (await ensureCheckpoint(sequelize, config, principal.organisationId)).checkpoint;
    if (options.fromSize !== undefined) {
      const pinned = await checkpointAt(sequelize, principal.organisationId, options.fromSize, '/fromSize');
      if (pinned.treeSize >= checkpoint!.treeSize) {
        throw new Refused('nothing-new', `nothing was appended after the checkpoint of tree size ${pinned.treeSize}, the latest`, [
          { field: '/fromSize', detail: `the latest checkpoint has tree size ${checkpoint!.treeSize}` },
        ]);
      }
      after = pinned.treeSize;
    }
    if (!checkpoint) return; // an empty ledger: nothing to export, nothing to prove
    upTo = checkpoint.treeSize;
    yield exportHeader(checkpoint, appliedFilter(filter), after + 1) + '\n';
  }
  const page = format === 'csv' ? 500 : 200;
  for (;;) {
    // A CSV row needs four numbers of the stored result and spec, so only they are read (as jsonb,
    // parsed as before): parsing each whole result held the event loop for 50 ms a page.
    const cols =
      format === 'csv'
        ? `id, sequence, recorded_at, product_sku, product_name, lot_code, line, packed_at, lot_size, testing, measurement_count,
           decision, result #> '{statistics,descriptive,mean}' AS mean, result #> '{statistics,descriptive,standardDeviation}' AS standard_deviation,
           product_spec -> 'unit' AS unit, product_spec -> 'nominalQuantity' AS nominal_quantity,
           rulebook_id, rulebook_version, engine_version, first_sample_verdict_id, retest_of_verdict_id, retest_reason, submitted_by, seal, previous_seal,
           ${WITHDRAWAL_COLUMN}`
        : // a big record is left out here and read in slices below (octet_length reads no record)
          `sequence, seal, signature, kid, CASE WHEN octet_length(record) <= ${RECORD_SLICE_CHARS} THEN record END AS record`;
    const [lo, n, hi] = [`$${bind.length + 1}`, `$${bind.length + 2}`, `$${bind.length + 3}`];
    // NDJSON holds the chain's records in ledger order: the verdicts, and the withdrawals (issue 16) —
    // all of them in a complete export, those of the verdicts the filter selects in a filtered one.
    const from =
      format === 'csv'
        ? `SELECT ${cols} FROM verdicts WHERE ${where} AND sequence > ${lo} AND sequence <= ${hi}`
        : appliedFilter(filter) === null
          ? `SELECT kind, ${cols} FROM ledger_entries WHERE organisation_id = $1 AND sequence > ${lo} AND sequence <= ${hi}`
          : `SELECT 'verdict' AS kind, ${cols} FROM verdicts WHERE ${where} AND sequence > ${lo} AND sequence <= ${hi}
             UNION ALL
             SELECT 'withdrawal' AS kind, ${cols} FROM verdict_withdrawals
               WHERE organisation_id = $1 AND sequence > ${lo} AND sequence <= ${hi} AND verdict_id IN (SELECT id FROM verdicts WHERE ${where})`;
    const rows = await sequelize.query<VerdictRow & CsvNumbers & { kind?: string; withdrawal: WithdrawalRow | null }>(
      `${from} ORDER BY sequence LIMIT ${n}`,
      { bind: [...bind, after, page, upTo], type: QueryTypes.SELECT },
    );
    const proofs = format === 'ndjson' ? await inclusionProofs(sequelize, principal.organisationId, rows.map((r) => Number(r.sequence) - 1), upTo) : [];
    let chunk = '';
    let slice = performance.now();
    for (const [i, r] of rows.entries()) {
      if (format === 'ndjson' && r.record === null) {
        // The document around the record, as sealedDocumentText writes it, and the record between in slices.
        // (only a verdict's record is ever this big: a withdrawal's is a few hundred bytes)
        const [head, tail] = withInclusion(sealedDocumentText({ seal: r.seal, signature: r.signature, kid: r.kid, record: '\u0000' }), proofs[i]!).split('\u0000');
        yield chunk + head;
        chunk = '';
        for await (const part of recordSlices(sequelize, principal.organisationId, Number(r.sequence))) yield part;
        chunk = tail + '\n';
      } else if (format === 'ndjson') {
        const doc = { seal: r.seal, signature: r.signature, kid: r.kid, record: r.record! };
        chunk += withInclusion(r.kind === 'withdrawal' ? sealedWithdrawalText(doc) : sealedDocumentText(doc), proofs[i]!) + '\n';
      } else {
        chunk += [
          r.sequence, r.id, r.recorded_at, r.product_sku, r.product_name, r.lot_code, r.line, r.packed_at, r.lot_size, r.testing,
          r.measurement_count, r.decision, r.mean, r.standard_deviation, r.unit, r.nominal_quantity,
          `${r.rulebook_id}@${r.rulebook_version}`, r.engine_version, r.first_sample_verdict_id, r.retest_of_verdict_id, r.retest_reason,
          submitterText(r.submitted_by), r.seal, r.previous_seal,
          r.withdrawal?.id, r.withdrawal ? new Date(r.withdrawal.recordedAt).toISOString() : null, r.withdrawal?.reason,
        ].map(csvField).join(',') + '\r\n';
      }
      if (chunk.length >= CHUNK_CHARS) {
        yield chunk;
        chunk = '';
      }
      if (performance.now() - slice >= SLICE_MS) {
        await nextTurn();
        slice = performance.now();
      }
    }
    if (chunk) yield chunk;
    if (rows.length < page) return;
    after = Number(rows[rows.length - 1]!.sequence);
  }
}

/** fromSize only means something for NDJSON (the pinned checkpoint the reader holds). */
export function exportOptionsOf(format: 'csv' | 'ndjson', fromSize: number | undefined): ExportOptions {
  if (fromSize !== undefined && format !== 'ndjson') {
    throw new InvalidInput('fromSize applies to NDJSON exports only', [{ field: '/fromSize', detail: 'use it with format=ndjson' }]);
  }
  return { fromSize };
}
