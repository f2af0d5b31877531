// The SQL the ledger's group commit sends, and nothing else: the locks and the one read under
// them, and the multi-row inserts of verdicts, stored replies, webhook deliveries and alert
// e-mails, each table's column list written once here beside its casts. Raw SQL on a borrowed
// connection (see DEVELOPERS.md, "Persistence"): one transaction of three round trips per batch.
import { priorRepliesUnderLock, STORED_REPLY_COLUMNS, type PriorReply } from '../core/idempotency';
import type { PgClient } from '../db/raw';
import type { EndpointSubscription } from './notifications';
import type { VerdictRow } from './verdict-records';

/** Advisory-lock class of the chains: the lock is (LOCK_CLASS, hashtext(organisation id)). Withdrawals take it too (withdrawals.ts). */
export const LOCK_CLASS = 7820;
const UUID = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i;
/** Bind parameters one statement may carry (PostgreSQL's limit is 65 535). */
const MAX_BINDS = 60_000;

type Columns = readonly (readonly [string, string])[];

/** The verdicts table as the ledger writes it: column, cast. `verdictValues` gives a row in this order. */
const VERDICT_COLUMNS: Columns = [
  ['id', '::uuid'], ['organisation_id', '::uuid'], ['sequence', '::bigint'], ['seal', ''], ['previous_seal', ''], ['signature', ''],
  ['kid', ''], ['record', ''], ['product_id', '::uuid'], ['product_sku', ''], ['product_name', ''], ['product_spec', '::json'],
  ['lot_code', ''], ['line', ''], ['packed_at', '::timestamptz'], ['lot_size', '::integer'], ['testing', ''], ['measurement_unit', ''],
  ['measurement_count', '::integer'], ['client_reference', ''], ['source_format', ''], ['first_sample_verdict_id', '::uuid'],
  ['retest_of_verdict_id', '::uuid'], ['retest_reason', ''], ['submitted_by', '::json'],
  ['decision', ''], ['result', '::json'], ['engine_version', ''], ['rulebook_id', ''], ['rulebook_version', ''], ['recorded_at', '::timestamptz'],
];
const JSON_COLUMNS = new Set(['product_spec', 'result', 'submitted_by']);

const DELIVERY_COLUMNS: Columns = [['id', '::uuid'], ['organisation_id', '::uuid'], ['endpoint_id', '::uuid'], ['verdict_id', '::uuid'], ['event_type', ''], ['payload', '']];
const EMAIL_COLUMNS: Columns = [['id', '::uuid'], ['organisation_id', '::uuid'], ['verdict_id', '::uuid'], ['recipients', '::text[]'], ['subject', ''], ['body', '']];

/** A verdict row's values in VERDICT_COLUMNS' order, with its record's bytes. */
export function verdictValues(row: VerdictRow, record: Buffer): unknown[] {
  const r = row as unknown as Record<string, unknown>;
  return VERDICT_COLUMNS.map(([c]) => (c === 'record' ? record : JSON_COLUMNS.has(c) ? JSON.stringify(r[c]) : r[c]));
}
export function deliveryValues(d: { id: string; organisationId: string; endpointId: string; verdictId: string; eventType: string; payload: string }): unknown[] {
  return [d.id, d.organisationId, d.endpointId, d.verdictId, d.eventType, d.payload];
}
export function emailValues(e: { id: string; organisationId: string; verdictId: string; recipients: string[]; subject: string; text: string }): unknown[] {
  return [e.id, e.organisationId, e.verdictId, e.recipients, e.subject, e.text];
}

/** The latest judgement of a lot (organisation, product, lot code), as read under the lock. */
export interface LotHead {
  organisation_id: string;
  product_id: string;
  lot_code: string;
  id: string;
  decision: string;
  first_sample_verdict_id: string | null;
}

/** What the batch reads under the locks: each chain's head (its last verdict or withdrawal), stored replies, taken first samples, the lots' latest judgements, subscribed endpoints. */
export interface ReadUnderLock {
  heads: { id: string; sequence: number | null; seal: string | null }[];
  keys: (PriorReply & { organisation_id: string; key: string })[];
  taken: string[];
  lots: LotHead[];
  endpoints: EndpointSubscription[];
}

/**
 * BEGIN, the advisory lock of every chain the batch appends to (in sorted order: no deadlock),
 * and every read the batch needs, as one simple-protocol query. Each statement of it takes its own
 * snapshot, so the reads after the lock see every commit made before the lock was granted.
 */
export async function beginAndReadUnderLock(
  conn: PgClient,
  batch: { organisations: string[]; claims: [string, string][]; operation: string; firstSampleIds: string[]; lots: [string, string, string][] },
): Promise<ReadUnderLock> {
  const orgs = [...batch.organisations].sort();
  for (const o of orgs) if (!UUID.test(o)) throw new Error(`not an organisation id: ${JSON.stringify(o)}`);
  const lit = (v: unknown) => conn.escapeLiteral(JSON.stringify(v));
  const locks = orgs.map((o) => `SELECT pg_advisory_xact_lock(${LOCK_CLASS}, hashtext('${o}'));`).join('\n');
  const read = `
        SELECT
          (SELECT coalesce(json_agg(json_build_object('id', o.id, 'sequence', v.sequence, 'seal', v.seal)), '[]')
             FROM json_array_elements_text(${lit(orgs)}::json) AS o(id)
             LEFT JOIN LATERAL (SELECT sequence, seal FROM ledger_entries WHERE organisation_id = o.id::uuid ORDER BY sequence DESC LIMIT 1) v ON true) AS heads,
          ${priorRepliesUnderLock(lit(batch.claims), conn.escapeLiteral(batch.operation))} AS keys,
          (SELECT coalesce(json_agg(first_sample_verdict_id), '[]') FROM verdicts
             WHERE first_sample_verdict_id IN (SELECT x::uuid FROM json_array_elements_text(${lit(batch.firstSampleIds)}::json) x)) AS taken,
          (SELECT coalesce(json_agg(json_build_object('organisation_id', l.o, 'product_id', l.p, 'lot_code', l.c, 'id', v.id, 'decision', v.decision,
                                                      'first_sample_verdict_id', v.first_sample_verdict_id)), '[]')
             FROM (SELECT DISTINCT x->>0 AS o, x->>1 AS p, x->>2 AS c FROM json_array_elements(${lit(batch.lots)}::json) x) l
             JOIN LATERAL (SELECT id, decision, first_sample_verdict_id FROM verdicts
                            WHERE organisation_id = l.o::uuid AND product_id = l.p::uuid AND lot_code = l.c ORDER BY sequence DESC LIMIT 1) v ON true) AS lots,
          (SELECT coalesce(json_agg(json_build_object('id', w.id, 'organisation_id', w.organisation_id, 'events', w.events)), '[]')
             FROM webhook_endpoints w
             WHERE w.organisation_id IN (SELECT x::uuid FROM json_array_elements_text(${lit(orgs)}::json) x) AND w.enabled AND w.deleted_at IS NULL) AS endpoints`;
  const results = (await conn.query(`BEGIN;\n${locks}\n${read}`)) as { rows: Record<string, unknown>[] }[];
  const raw = results[results.length - 1]!.rows[0]!;
  return Object.fromEntries(Object.entries(raw).map(([k, v]) => [k, typeof v === 'string' ? JSON.parse(v) : v])) as unknown as ReadUnderLock;
}

/** The rows one batch writes, per table. */
export interface BatchRows {
  verdicts: unknown[][];
  replies: unknown[][];
  deliveries: unknown[][];
  emails: unknown[][];
}

/** VALUES tuples for rows, appending their values to bind (numbered after what bind holds). */
function values(rows: unknown[][], columns: Columns, bind: unknown[]): string {
  return rows.map((r) => `(${r.map((v, i) => (bind.push(v), `$${bind.length}${columns[i]![1]}`)).join(', ')})`).join(', ');
}

/**
 * Queues the batch's inserts and COMMIT on the connection: as few statements as the bind limit
 * allows (usually one), the verdicts first, then the rows that reference them, as data-modifying
 * CTEs whose foreign keys are checked at the end. Resolves with the COMMIT's result once every
 * query has settled (none is left unobserved); rejects with the first failure.
 */
export async function insertAndCommit(conn: PgClient, rows: BatchRows): Promise<void> {
  const tables: [string, Columns, unknown[][]][] = [
    ['verdicts', VERDICT_COLUMNS, rows.verdicts],
    ['idempotency_records', STORED_REPLY_COLUMNS, rows.replies],
    ['webhook_deliveries', DELIVERY_COLUMNS, rows.deliveries],
    ['alert_emails', EMAIL_COLUMNS, rows.emails],
  ];
  const statements: { parts: string[]; bind: unknown[] }[] = [];
  for (const [table, columns, tableRows] of tables) {
    if (tableRows.length === 0) continue;
    const need = tableRows.length * columns.length;
    let cur = statements[statements.length - 1];
    if (!cur || cur.bind.length + need > MAX_BINDS) statements.push((cur = { parts: [], bind: [] }));
    cur.parts.push(`INSERT INTO ${table} (${columns.map(([c]) => c).join(', ')}) VALUES ${values(tableRows, columns, cur.bind)}`);
  }
  const sent = statements.map((st) => {
    const [last, ...before] = [...st.parts].reverse();
    const sql = before.length ? `WITH ${before.reverse().map((p, i) => `w${i} AS (${p})`).join(', ')} ${last}` : last!;
    return conn.query(sql, st.bind);
  });
  const committed = conn.query('COMMIT');
  const settled = await Promise.allSettled([...sent, committed]);
  const failed = settled.find((x): x is PromiseRejectedResult => x.status === 'rejected');
  if (failed) throw failed.reason;
  const tag = ((settled[settled.length - 1] as PromiseFulfilledResult<unknown>).value as { command: string }).command;
  if (tag !== 'COMMIT') throw new Error(`the ledger transaction ended with ${tag}`);
}
