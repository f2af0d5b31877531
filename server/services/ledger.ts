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
import { QueryTypes, type Sequelize, type Transaction } from 'sequelize';
import type { Config } from '../config';
import { ConflictProblem, UnprocessableProblem } from '../http/problem';
import { currentSigningKey, publishSigningKey, signSeal } from './signing-keys';
import { assembleRecord, verdictView, type ChainPosition, type VerdictRow, type VerdictView } from './verdict-records';
import { alertEmailFor, deliveriesFor, type EndpointSubscription } from './notifications';

/** A verdict ready to be sealed: everything but its place in the chain. */
export interface PendingVerdict {
  verdictId: string;
  organisationId: string;
  /** Canonical JSON of each content field of the record. */
  parts: Map<string, string>;
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

async function lockChain(sequelize: Sequelize, t: Transaction, organisationId: string): Promise<void> {
  await sequelize.query('SELECT pg_advisory_xact_lock($1, hashtext($2))', { bind: [LOCK_CLASS, organisationId], transaction: t });
}

function values(rows: unknown[][], casts: string[]): { sql: string; bind: unknown[] } {
  const bind: unknown[] = [];
  const tuples = rows.map((r) => `(${r.map((v, i) => (bind.push(v), `$${bind.length}${casts[i] ?? ''}`)).join(', ')})`);
  return { sql: tuples.join(', '), bind };
}

class Appender {
  private queue: Queued[] = [];
  private running = false;

  constructor(
    private readonly sequelize: Sequelize,
    private readonly config: Config,
  ) {}

  append(item: PendingVerdict): Promise<AppendOutcome> {
    return new Promise((resolve, reject) => {
      this.queue.push({ item, resolve, reject });
      if (!this.running) void this.run();
    });
  }

  private async run(): Promise<void> {
    this.running = true;
    try {
      while (this.queue.length > 0) {
        const batch = this.queue.splice(0, this.config.verdicts.ledgerBatchMax);
        try {
          await this.commit(batch);
        } catch (err) {
          if (batch.length === 1) {
            batch[0]!.reject(err);
            continue;
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
    } finally {
      this.running = false;
    }
  }

  private async commit(batch: Queued[]): Promise<void> {
    const key = currentSigningKey(this.config);
    await publishSigningKey(this.sequelize, key);
    const outcomes = new Map<Queued, AppendOutcome | Error>();
    let notified = false;
    await this.sequelize.transaction(async (t) => {
      const q = <T extends object>(sql: string, bind: unknown[]) =>
        this.sequelize.query<T>(sql, { bind, transaction: t, type: QueryTypes.SELECT });
      const orgs = [...new Set(batch.map((b) => b.item.organisationId))].sort();
      for (const org of orgs) await lockChain(this.sequelize, t, org);

      // Read under the lock, each in its own statement (so it sees every commit before the lock).
      const heads = await q<{ id: string; sequence: string | null; seal: string | null }>(
        `SELECT o.id, v.sequence, v.seal FROM unnest($1::uuid[]) AS o(id)
         LEFT JOIN LATERAL (SELECT sequence, seal FROM verdicts WHERE organisation_id = o.id ORDER BY sequence DESC LIMIT 1) v ON true`,
        [orgs],
      );
      const head = new Map(heads.map((h) => [h.id, { sequence: Number(h.sequence ?? 0), seal: h.seal }]));

      const keyed = batch.filter((b) => b.item.idempotency);
      const existingKeys = new Map<string, { request_hash: string; status: number; response: string }>();
      if (keyed.length > 0) {
        const rows = await q<{ organisation_id: string; key: string; request_hash: string; status: number; response: string }>(
          `SELECT organisation_id, key, request_hash, status, response FROM idempotency_records
           WHERE operation = $1 AND (organisation_id, key) IN (SELECT * FROM unnest($2::uuid[], $3::text[]))`,
          [SUBMIT_OPERATION, keyed.map((b) => b.item.organisationId), keyed.map((b) => b.item.idempotency!.key)],
        );
        for (const r of rows) existingKeys.set(`${r.organisation_id}\n${r.key}`, r);
      }

      const firstIds = batch.map((b) => b.item.row.first_sample_verdict_id).filter((x): x is string => x !== null);
      const takenFirst = new Set<string>();
      if (firstIds.length > 0) {
        const rows = await q<{ first_sample_verdict_id: string }>(
          'SELECT first_sample_verdict_id FROM verdicts WHERE first_sample_verdict_id = ANY($1::uuid[])',
          [firstIds],
        );
        for (const r of rows) takenFirst.add(r.first_sample_verdict_id);
      }

      const endpoints = await q<EndpointSubscription>(
        'SELECT id, organisation_id, events FROM webhook_endpoints WHERE organisation_id = ANY($1::uuid[]) AND enabled AND deleted_at IS NULL',
        [orgs],
      );

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
        const seal = createHash('sha256').update(record, 'utf8').digest('hex');
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

      if (verdictRows.length > 0) {
        const v = values(verdictRows, ['', '', '', '', '', '', '', '', '', '', '', '::json', '', '', '::timestamptz', '', '', '', '', '', '', '', '', '::json', '', '', '', '::timestamptz']);
        await this.sequelize.query(
          `INSERT INTO verdicts (id, organisation_id, sequence, seal, previous_seal, signature, kid, record, product_id, product_sku,
             product_name, product_spec, lot_code, line, packed_at, lot_size, testing, measurement_unit, measurement_count,
             client_reference, source_format, first_sample_verdict_id, decision, result, engine_version, rulebook_id, rulebook_version, recorded_at)
           VALUES ${v.sql}`,
          { bind: v.bind, transaction: t },
        );
      }
      if (keyRows.length > 0) {
        const v = values(keyRows, []);
        await this.sequelize.query(
          `INSERT INTO idempotency_records (organisation_id, operation, key, request_hash, status, response, resource_id) VALUES ${v.sql}`,
          { bind: v.bind, transaction: t },
        );
      }
      if (deliveryRows.length > 0) {
        const v = values(deliveryRows, []);
        await this.sequelize.query(
          `INSERT INTO webhook_deliveries (id, organisation_id, endpoint_id, verdict_id, event_type, payload) VALUES ${v.sql}`,
          { bind: v.bind, transaction: t },
        );
        notified = true;
      }
      if (emailRows.length > 0) {
        const v = values(emailRows, ['', '', '', '::text[]']);
        await this.sequelize.query(`INSERT INTO alert_emails (id, organisation_id, verdict_id, recipients, subject, body) VALUES ${v.sql}`, {
          bind: v.bind,
          transaction: t,
        });
        notified = true;
      }
    });
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
