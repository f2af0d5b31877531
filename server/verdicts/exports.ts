// Exports: CSV (one summary row per verdict, for spreadsheets) and NDJSON (one sealed document per
// line, for the offline verifier). Oldest first, streamed page by page.
import { QueryTypes, type Sequelize } from 'sequelize';
import type { Principal } from '../core/principal';
import { filterSql, type VerdictFilter } from './stored-verdicts';
import { sealedDocumentText, type VerdictRow } from './verdict-records';

const CSV_COLUMNS = [
  'sequence', 'verdict_id', 'recorded_at', 'product_sku', 'product_name', 'lot_code', 'line', 'packed_at', 'lot_size', 'testing',
  'measurement_count', 'decision', 'mean', 'standard_deviation', 'unit', 'nominal_quantity', 'rulebook', 'engine_version',
  'first_sample_verdict_id', 'seal', 'previous_seal',
] as const;

/** RFC 4180 field; a leading = + - @ is prefixed with ' so spreadsheets do not run it as a formula. */
function csvField(v: unknown): string {
  if (v === null || v === undefined) return '';
  let s = v instanceof Date ? v.toISOString() : String(v);
  if (/^[=+\-@\t\r]/.test(s) && typeof v === 'string') s = `'${s}`;
  return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

export async function* exportVerdicts(
  sequelize: Sequelize,
  principal: Principal,
  format: 'csv' | 'ndjson',
  filter: VerdictFilter,
): AsyncGenerator<string> {
  const { where, bind } = filterSql(principal.organisationId, filter);
  if (format === 'csv') yield CSV_COLUMNS.join(',') + '\r\n';
  let after = 0;
  const page = format === 'csv' ? 1000 : 50;
  for (;;) {
    const cols =
      format === 'csv'
        ? `id, sequence, recorded_at, product_sku, product_name, lot_code, line, packed_at, lot_size, testing, measurement_count,
           decision, result, product_spec, rulebook_id, rulebook_version, engine_version, first_sample_verdict_id, seal, previous_seal`
        : 'sequence, seal, signature, kid, record';
    const rows = await sequelize.query<VerdictRow>(
      `SELECT ${cols} FROM verdicts WHERE ${where} AND sequence > $${bind.length + 1} ORDER BY sequence LIMIT $${bind.length + 2}`,
      { bind: [...bind, after, page], type: QueryTypes.SELECT },
    );
    for (const r of rows) {
      if (format === 'ndjson') {
        yield sealedDocumentText({ seal: r.seal, signature: r.signature, kid: r.kid, record: r.record! }) + '\n';
      } else {
        const d = r.result.statistics.descriptive as { mean?: number; standardDeviation?: number | null };
        yield [
          r.sequence, r.id, r.recorded_at, r.product_sku, r.product_name, r.lot_code, r.line, r.packed_at, r.lot_size, r.testing,
          r.measurement_count, r.decision, d.mean, d.standardDeviation, r.product_spec.unit, r.product_spec.nominalQuantity,
          `${r.rulebook_id}@${r.rulebook_version}`, r.engine_version, r.first_sample_verdict_id, r.seal, r.previous_seal,
        ].map(csvField).join(',') + '\r\n';
      }
    }
    if (rows.length < page) return;
    after = Number(rows[rows.length - 1]!.sequence);
  }
}
