// The ledger: each organisation's verdicts form a hash chain (every record carries the previous
// seal). Appends are serialised per organisation by a transaction-scoped advisory lock on the
// organisation's chain head, so several processes never fork a chain.
//
// Group commit: each process has one appender per database. Submissions that arrive while a
// transaction is in flight queue up, and the next transaction appends all of them under one lock,
// with one multi-row insert — the lock is held for a few milliseconds per batch instead of for
// the whole of every request. Everything a verdict causes (idempotency record, webhook deliveries,
// alert e-mail) is written in the same transaction, so a crash never loses one and never leaves
// one without its verdict.
import { createHash, randomUUID } from 'node:crypto';
import { EventEmitter } from 'node:events';
import type { Sequelize } from 'sequelize';
import type { Config } from '../config';
import { ConflictProblem, UnprocessableProblem } from '../http/problem';
import { currentSigningKey, publishSigningKey, signSeal } from './signing-keys';
import { assembleRecord, verdictView, type ChainPosition, type VerdictRow, type VerdictView } from './verdict-records';
import { alertEmailFor, deliveriesFor, type EndpointSubscription } from './notifications';

/** A verdict ready to be sealed: everything but its place in the chain. */
export interface PendingVerdict {
  verdictId: string;
  organisationId: string;
  /** Canonical JSON (UTF-8) of each content field of the record. */
  parts: Map<string, Buffer>;
  /** The row's columns, except the chain and seal fields. */
  row: Omit<VerdictRow, 'sequence' | 'seal' | 'previous_seal' | 'signature' | 'kid' | 'recorded_at' | 'record'>;
  idempotency: { key: string; requestHash: string } | null;
  alertRecipients: string[];
}

export type AppendOutcome =
  | { kind: 'created'; status: 201; body: string; view: VerdictView }
  | { kind: 'replayed'; status: number; body: string };

interface Queued {
  item: PendingVerdict;
  resolve: (o: AppendOutcome) => void;
  reject: (e: unknown) => void;
}

/** Emits 'appended' after every commit that wrote notifications (the job drain listens). */
export const ledgerEvents = new EventEmitter();
ledgerEvents.setMaxListeners(100);

const LOCK_CLASS = 7820;
export const SUBMIT_OPERATION = 'submitLot';

/** VALUES tuples for rows, appending their values to bind (numbered after what bind holds). */
function values(rows: unknown[][], casts: string[], bind: unknown[]): string {
  return rows.map((r) => `(${r.map((v, i) => (bind.push(v), `$${bind.length}${casts[i] ?? ''}`)).join(', ')})`).join(', ');
}

/** The node-postgres client behind a Sequelize connection (what the connection manager hands out). */
interface PgClient {
  query(text: string | { name: string; text: string; values: unknown[] }, values?: unknown[]): Promise<PgResult | PgResult[]>;
  escapeLiteral(s: string): string;
}
interface PgResult {
  command: string;
  rows: Record<string, unknown>[];
}
interface ConnectionManager {
  getConnection(): Promise<PgClient>;
  releaseConnection(c: PgClient): Promise<void>;
}

const UUID = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i;
/** Bind parameters one statement may carry (PostgreSQL's limit is 65 535). */
const MAX_BINDS = 60_000;
/** Group-commit transactions in flight per process: the next batch links and seals while the one
 *  before it commits; the advisory lock still orders them, so the chain cannot fork. */
const IN_FLIGHT = 2;

/** The insert's text depends only on the batch's shape (how many rows of each table), so each
 *  shape gets a named statement: every connection parses and plans it once, then only binds. */
const statementNames = new Map<string, string>();
const MAX_NAMED_STATEMENTS = 200;
const MAX_NAMED_BINDS = 8_000;
function statementName(sql: string): string | null {
  let name = statementNames.get(sql);
  if (name) return name;
  if (statementNames.size >= MAX_NAMED_STATEMENTS || sql.length > MAX_NAMED_BINDS * 12) return null;
  name = `lotproof_ledger_${statementNames.size + 1}`;
  statementNames.set(sql, name);
  return name;
}

interface ReadUnderLock {
  heads: { id: string; sequence: number | null; seal: string | null }[];
  keys: { organisation_id: string; key: string; request_hash: string; status: number; response: string }[];
  taken: string[];
  endpoints: EndpointSubscription[];
}

class Appender {
  private queue: Queued[] = [];
  private active = 0;

  constructor(
    private readonly sequelize: Sequelize,
    private readonly config: Config,
  ) {}

  append(item: PendingVerdict): Promise<AppendOutcome> {
    return new Promise((resolve, reject) => {
      this.queue.push({ item, resolve, reject });
      this.pump();
    });
  }

  /** Starts batches while there is work and a free slot; a batch takes everything queued so far. */
  private pump(): void {
    while (this.queue.length > 0 && this.active < IN_FLIGHT) {
      const batch = this.queue.splice(0, this.config.verdicts.ledgerBatchMax);
      this.active++;
      void this.settle(batch).finally(() => {
        this.active--;
        this.pump();
      });
    }
  }

  private async settle(batch: Queued[]): Promise<void> {
    try {
      await this.commit(batch);
    } catch (err) {
      if (batch.length === 1) {
        batch[0]!.reject(err);
        return;
      }
      // One bad item must not sink the others: retry each on its own.
      for (const q of batch) {
        try {
          await this.commit([q]);
        } catch (e) {
          q.reject(e);
        }
      }
    }
  }

  /**
   * One transaction, three round trips: (1) BEGIN, the advisory locks and every read the batch
   * needs, sent as one simple-protocol query — each statement of it takes its own snapshot, so the
   * reads after the lock see every commit made before the lock was granted; (2) one INSERT of the
   * verdicts, idempotency records, webhook deliveries and alert e-mails (data-modifying CTEs, all
   * values bound); (3) COMMIT, queued right behind it. The seals are computed between (1) and (2).
   */
  private async commit(batch: Queued[]): Promise<void> {
    const key = currentSigningKey(this.config);
    await publishSigningKey(this.sequelize, key);
    const outcomes = new Map<Queued, AppendOutcome | Error>();
    const orgs = [...new Set(batch.map((b) => b.item.organisationId))].sort();
    for (const o of orgs) if (!UUID.test(o)) throw new Error(`not an organisation id: ${JSON.stringify(o)}`);
    const keyed = batch.filter((b) => b.item.idempotency);
    const firstIds = batch.map((b) => b.item.row.first_sample_verdict_id).filter((x): x is string => x !== null);

    const cm = this.sequelize.connectionManager as unknown as ConnectionManager;
    const conn = await cm.getConnection();
    let inTransaction = false;
    let notified = false;
    try {
      const lit = (v: unknown) => conn.escapeLiteral(JSON.stringify(v));
      const locks = orgs.map((o) => `SELECT pg_advisory_xact_lock(${LOCK_CLASS}, hashtext('${o}'));`).join('\n');
      const read = `
        SELECT
          (SELECT coalesce(json_agg(json_build_object('id', o.id, 'sequence', v.sequence, 'seal', v.seal)), '[]')
             FROM json_array_elements_text(${lit(orgs)}::json) AS o(id)
             LEFT JOIN LATERAL (SELECT sequence, seal FROM verdicts WHERE organisation_id = o.id::uuid ORDER BY sequence DESC LIMIT 1) v ON true) AS heads,
          (SELECT coalesce(json_agg(json_build_object('organisation_id', r.organisation_id, 'key', r.key, 'request_hash', r.request_hash,
                                                      'status', r.status, 'response', r.response)), '[]')
             FROM idempotency_records r
             WHERE r.operation = ${conn.escapeLiteral(SUBMIT_OPERATION)}
               AND (r.organisation_id, r.key) IN (SELECT (e->>0)::uuid, e->>1 FROM json_array_elements(${lit(keyed.map((b) => [b.item.organisationId, b.item.idempotency!.key]))}::json) e)) AS keys,
          (SELECT coalesce(json_agg(first_sample_verdict_id), '[]') FROM verdicts
             WHERE first_sample_verdict_id IN (SELECT x::uuid FROM json_array_elements_text(${lit(firstIds)}::json) x)) AS taken,
          (SELECT coalesce(json_agg(json_build_object('id', w.id, 'organisation_id', w.organisation_id, 'events', w.events)), '[]')
             FROM webhook_endpoints w
             WHERE w.organisation_id IN (SELECT x::uuid FROM json_array_elements_text(${lit(orgs)}::json) x) AND w.enabled AND w.deleted_at IS NULL) AS endpoints`;
      inTransaction = true;
      const results = (await conn.query(`BEGIN;\n${locks}\n${read}`)) as PgResult[];
      const raw = results[results.length - 1]!.rows[0]!;
      const got = Object.fromEntries(Object.entries(raw).map(([k, v]) => [k, typeof v === 'string' ? JSON.parse(v) : v])) as unknown as ReadUnderLock;

      const head = new Map(got.heads.map((h) => [h.id, { sequence: Number(h.sequence ?? 0), seal: h.seal }]));
      const existingKeys = new Map(got.keys.map((r) => [`${r.organisation_id}\n${r.key}`, r]));
      const takenFirst = new Set<string>(got.taken);
      const endpoints = got.endpoints;

      const verdictRows: unknown[][] = [];
      const keyRows: unknown[][] = [];
      const deliveryRows: unknown[][] = [];
      const emailRows: unknown[][] = [];
      const sameBatchKeys = new Map<string, { requestHash: string; queued: Queued }>();
      for (const qd of batch) {
        const it = qd.item;
        const idem = it.idempotency;
        const idemId = idem ? `${it.organisationId}\n${idem.key}` : null;
        if (idem && idemId) {
          const prior = existingKeys.get(idemId);
          if (prior) {
            outcomes.set(
              qd,
              prior.request_hash === idem.requestHash ? { kind: 'replayed', status: prior.status, body: prior.response } : keyReusedProblem(),
            );
            continue;
          }
          const twin = sameBatchKeys.get(idemId);
          if (twin) {
            // Resolved after the batch commits, from the twin's outcome.
            outcomes.set(qd, twin.requestHash === idem.requestHash ? new TwinOf(twin.queued) : keyReusedProblem());
            continue;
          }
        }
        const first = it.row.first_sample_verdict_id;
        if (first !== null) {
          if (takenFirst.has(first)) {
            outcomes.set(qd, new ConflictProblem(`verdict ${first} already has a second sample; a first sample takes one second sample`, 'second-sample-exists'));
            continue;
          }
          takenFirst.add(first);
        }
        if (idem && idemId) sameBatchKeys.set(idemId, { requestHash: idem.requestHash, queued: qd });

        const h = head.get(it.organisationId)!;
        const chain: ChainPosition = { sequence: h.sequence + 1, previousSeal: h.seal, recordedAt: new Date().toISOString() };
        const record = assembleRecord(it.parts, chain);
        const seal = createHash('sha256').update(record).digest('hex');
        const signature = signSeal(key, seal);
        head.set(it.organisationId, { sequence: chain.sequence, seal });
        const row: VerdictRow = {
          ...it.row,
          sequence: chain.sequence,
          seal,
          previous_seal: chain.previousSeal,
          signature,
          kid: key.kid,
          recorded_at: chain.recordedAt,
        };
        const view = verdictView(row);
        const body = JSON.stringify(view);
        outcomes.set(qd, { kind: 'created', status: 201, body, view });
        const r = row;
        verdictRows.push([
          r.id, r.organisation_id, r.sequence, r.seal, r.previous_seal, r.signature, r.kid, record, r.product_id, r.product_sku,
          r.product_name, JSON.stringify(r.product_spec), r.lot_code, r.line, r.packed_at, r.lot_size, r.testing, r.measurement_unit,
          r.measurement_count, r.client_reference, r.source_format, r.first_sample_verdict_id, r.decision, JSON.stringify(r.result),
          r.engine_version, r.rulebook_id, r.rulebook_version, r.recorded_at,
        ]);
        if (idem) keyRows.push([it.organisationId, SUBMIT_OPERATION, idem.key, idem.requestHash, 201, body, r.id]);
        for (const d of deliveriesFor(view, it.organisationId, endpoints, this.config.publicUrl)) {
          deliveryRows.push([d.id, it.organisationId, d.endpointId, r.id, d.eventType, d.payload]);
        }
        const mail = alertEmailFor(view, it.alertRecipients, this.config.publicUrl);
        if (mail) emailRows.push([randomUUID(), it.organisationId, r.id, mail.recipients, mail.subject, mail.text]);
      }

      const inserts: { sql: string; rows: unknown[][]; casts: string[] }[] = [];
      if (verdictRows.length > 0) {
        inserts.push({
          sql: `INSERT INTO verdicts (id, organisation_id, sequence, seal, previous_seal, signature, kid, record, product_id, product_sku,
             product_name, product_spec, lot_code, line, packed_at, lot_size, testing, measurement_unit, measurement_count,
             client_reference, source_format, first_sample_verdict_id, decision, result, engine_version, rulebook_id, rulebook_version, recorded_at)
           VALUES `,
          rows: verdictRows,
          casts: ['::uuid', '::uuid', '::bigint', '', '', '', '', '', '::uuid', '', '', '::json', '', '', '::timestamptz', '::integer', '', '', '::integer', '', '', '::uuid', '', '::json', '', '', '', '::timestamptz'],
        });
      }
      if (keyRows.length > 0) {
        inserts.push({
          sql: 'INSERT INTO idempotency_records (organisation_id, operation, key, request_hash, status, response, resource_id) VALUES ',
          rows: keyRows,
          casts: ['::uuid', '', '', '', '::integer', '', '::uuid'],
        });
      }
      if (deliveryRows.length > 0) {
        inserts.push({
          sql: 'INSERT INTO webhook_deliveries (id, organisation_id, endpoint_id, verdict_id, event_type, payload) VALUES ',
          rows: deliveryRows,
          casts: ['::uuid', '::uuid', '::uuid', '::uuid', '', ''],
        });
        notified = true;
      }
      if (emailRows.length > 0) {
        inserts.push({
          sql: 'INSERT INTO alert_emails (id, organisation_id, verdict_id, recipients, subject, body) VALUES ',
          rows: emailRows,
          casts: ['::uuid', '::uuid', '::uuid', '::text[]', '', ''],
        });
        notified = true;
      }
      // As few statements as the bind limit allows (usually one): the verdicts first, then the rows
      // that reference them, as data-modifying CTEs whose foreign keys are checked at the end.
      const statements: { parts: string[]; bind: unknown[] }[] = [];
      for (const ins of inserts) {
        const need = ins.rows.length * ins.casts.length;
        let cur = statements[statements.length - 1];
        if (!cur || cur.bind.length + need > MAX_BINDS) statements.push((cur = { parts: [], bind: [] }));
        const v = values(ins.rows, ins.casts, cur.bind);
        cur.parts.push(ins.sql + v);
      }
      const sent = statements.map((st) => {
        const [last, ...before] = [...st.parts].reverse();
        const sql = before.length ? `WITH ${before.reverse().map((p, i) => `w${i} AS (${p})`).join(', ')} ${last}` : last!;
        const name = statementName(sql);
        return name ? conn.query({ name, text: sql, values: st.bind }) : conn.query(sql, st.bind);
      });
      const committed = conn.query('COMMIT');
      // Every query is queued on the connection already; wait for all, so none is left unobserved.
      const settled = await Promise.allSettled([...sent, committed]);
      inTransaction = false;
      const failed = settled.find((x): x is PromiseRejectedResult => x.status === 'rejected');
      if (failed) throw failed.reason;
      const tag = (settled[settled.length - 1] as PromiseFulfilledResult<PgResult>).value.command;
      if (tag !== 'COMMIT') throw new Error(`the ledger transaction ended with ${tag}`);
    } catch (err) {
      if (inTransaction) await conn.query('ROLLBACK').catch(() => {});
      throw err;
    } finally {
      await cm.releaseConnection(conn);
    }
    for (const qd of batch) {
      let o = outcomes.get(qd)!;
      if (o instanceof TwinOf) {
        const twin = outcomes.get(o.queued);
        o = twin && !(twin instanceof Error) ? { kind: 'replayed', status: twin.status, body: twin.body } : keyReusedProblem();
      }
      if (o instanceof Error) qd.reject(o);
      else qd.resolve(o);
    }
    if (notified) ledgerEvents.emit('appended');
  }
}

class TwinOf extends Error {
  constructor(readonly queued: Queued) {
    super('twin');
  }
}

export function keyReusedProblem(): UnprocessableProblem {
  return new UnprocessableProblem(
    'This Idempotency-Key was already used with a different request body. Use a new key for a new lot.',
    'idempotency-key-reused',
  );
}

const appenders = new WeakMap<Sequelize, Appender>();

/** Seals the verdict, links it into its organisation's chain and stores it (group commit). */
export function appendVerdict(sequelize: Sequelize, config: Config, item: PendingVerdict): Promise<AppendOutcome> {
  let a = appenders.get(sequelize);
  if (!a) appenders.set(sequelize, (a = new Appender(sequelize, config)));
  return a.append(item);
}

export function newVerdictId(): string {
  return randomUUID();
}
