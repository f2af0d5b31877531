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
import { setImmediate as nextTurn } from 'node:timers/promises';
import type { Sequelize } from 'sequelize';
import type { Config } from '../config';
import { Conflict } from '../core/errors';
import { keyReused, type IdempotencyClaim, storedReplyRow } from '../core/idempotency';
import { withConnection } from '../db/raw';
import { alertEmailFor, deliveriesFor } from './notifications';
import { beginAndReadUnderLock, deliveryValues, emailValues, insertAndCommit, verdictValues, type BatchRows, type LotHead, type ReadUnderLock } from './ledger-sql';
import { lotRefusal } from './lot-judgements';
import { currentSigningKey, publishSigningKey, signSeal, type SigningKey } from './signing-keys';
import { assembleRecord, verdictView, type ChainPosition, type VerdictRow, type VerdictView } from './verdict-records';

/** A verdict ready to be sealed: everything but its place in the chain. */
export interface PendingVerdict {
  verdictId: string;
  organisationId: string;
  /** Canonical JSON (UTF-8) of each content field of the record. */
  parts: Map<string, Buffer>;
  /** The row's columns, except the chain and seal fields. */
  row: Omit<VerdictRow, 'sequence' | 'seal' | 'previous_seal' | 'signature' | 'kid' | 'recorded_at' | 'record'>;
  /** The request's Idempotency-Key claim (operation submitLot), checked again under the lock. */
  idempotency: IdempotencyClaim | null;
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

/** A record with a part this big is sealed in one turn of the event loop and sent in the next. */
const BIG_RECORD_BYTES = 1 << 20;

/** Group-commit transactions in flight per process: the next batch links and seals while the one
 *  before it commits; the advisory lock still orders them, so the chain cannot fork. */
const IN_FLIGHT = 2;

/** A queued item whose key another item of the same batch claims first: it gets that item's reply. */
class TwinOf extends Error {
  constructor(readonly queued: Queued) {
    super('twin');
  }
}

type Outcome = AppendOutcome | Error;

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
   * One transaction, three round trips (ledger-sql.ts): BEGIN, the locks and the reads; the
   * inserts; COMMIT, queued right behind them. The seals are computed between the first two.
   */
  private async commit(batch: Queued[]): Promise<void> {
    const key = currentSigningKey(this.config);
    await publishSigningKey(this.sequelize, key);
    const { outcomes, rows } = await withConnection(this.sequelize, async (conn) => {
      let inTransaction = true;
      try {
        const read = await beginAndReadUnderLock(conn, {
          organisations: [...new Set(batch.map((b) => b.item.organisationId))],
          claims: batch.flatMap((b) => (b.item.idempotency ? [[b.item.organisationId, b.item.idempotency.key] as [string, string]] : [])),
          operation: batch.find((b) => b.item.idempotency)?.item.idempotency!.operation ?? 'submitLot',
          firstSampleIds: batch.map((b) => b.item.row.first_sample_verdict_id).filter((x): x is string => x !== null),
          lots: batch.map((b) => [b.item.organisationId, b.item.row.product_id, b.item.row.lot_code] as [string, string, string]),
        });
        const sealed = this.seal(batch, read, key);
        // A turn of the event loop between sealing and sending: for a big lot each holds it for
        // tens of ms (putting the record together and hashing it; pg copying it into the Bind
        // message), and back to back they held it past 100 ms. (Two immediates: the first, from
        // an I/O callback, runs before the loop polls again; after the second, timers and I/O
        // have had their turn.)
        if (batch.some((q) => [...q.item.parts.values()].some((part) => part.length >= BIG_RECORD_BYTES))) {
          await nextTurn();
          await nextTurn();
        }
        inTransaction = false; // COMMIT is sent with the inserts: a failed insert ends the transaction too
        await insertAndCommit(conn, sealed.rows);
        return sealed;
      } catch (err) {
        if (inTransaction) await conn.query('ROLLBACK').catch(() => {});
        throw err;
      }
    });
    for (const qd of batch) {
      let o = outcomes.get(qd)!;
      if (o instanceof TwinOf) {
        const twin = outcomes.get(o.queued);
        o = twin && !(twin instanceof Error) ? { kind: 'replayed', status: twin.status, body: twin.body } : keyReused();
      }
      if (o instanceof Error) qd.reject(o);
      else qd.resolve(o);
    }
    if (rows.deliveries.length > 0 || rows.emails.length > 0) ledgerEvents.emit('appended');
  }

  /**
   * Links each item of the batch to its chain's head and seals it, in queue order, or decides it
   * needs no new verdict: a key seen before replays (or is refused), a first sample that already
   * has its second sample is a conflict, and so is a lot judged before unless this is its second
   * sample or a re-test of its latest judgement (lot-judgements.ts) — the batch's own verdicts
   * count as judged. Returns each item's outcome and the rows to insert.
   */
  private seal(batch: Queued[], read: ReadUnderLock, key: SigningKey): { outcomes: Map<Queued, Outcome>; rows: BatchRows } {
    const head = new Map(read.heads.map((h) => [h.id, { sequence: Number(h.sequence ?? 0), seal: h.seal }]));
    const existingKeys = new Map(read.keys.map((r) => [`${r.organisation_id}\n${r.key}`, r]));
    const takenFirst = new Set<string>(read.taken);
    const lotKey = (org: string, product: string, lotCode: string) => `${org}\n${product}\n${lotCode}`;
    const lots = new Map<string, LotHead>(read.lots.map((l) => [lotKey(l.organisation_id, l.product_id, l.lot_code), l]));
    const outcomes = new Map<Queued, Outcome>();
    const rows: BatchRows = { verdicts: [], replies: [], deliveries: [], emails: [] };
    const sameBatchKeys = new Map<string, { requestHash: string; queued: Queued }>();
    for (const qd of batch) {
      const it = qd.item;
      const claim = it.idempotency;
      const claimId = claim ? `${it.organisationId}\n${claim.key}` : null;
      if (claim && claimId) {
        const prior = existingKeys.get(claimId);
        if (prior) {
          outcomes.set(qd, prior.request_hash === claim.requestHash ? { kind: 'replayed', status: prior.status, body: prior.response } : keyReused());
          continue;
        }
        const twin = sameBatchKeys.get(claimId);
        if (twin) {
          // Resolved after the batch commits, from the twin's outcome.
          outcomes.set(qd, twin.requestHash === claim.requestHash ? new TwinOf(twin.queued) : keyReused());
          continue;
        }
      }
      const first = it.row.first_sample_verdict_id;
      const lot = lotKey(it.organisationId, it.row.product_id, it.row.lot_code);
      const latest = lots.get(lot) ?? null;
      if (first !== null && takenFirst.has(first) && !(latest && latest.first_sample_verdict_id === first)) {
        const detail = `verdict ${first} already has a second sample; a first sample takes one second sample`;
        outcomes.set(qd, new Conflict(detail, 'second-sample-exists', [{ field: '/firstSampleVerdictId', detail }]));
        continue;
      }
      const refusal = lotRefusal({ lotCode: it.row.lot_code, firstSampleId: first, retestOf: it.row.retest_of_verdict_id }, latest);
      if (refusal) {
        outcomes.set(qd, refusal);
        continue;
      }
      if (first !== null) takenFirst.add(first);
      if (claim && claimId) sameBatchKeys.set(claimId, { requestHash: claim.requestHash, queued: qd });

      const h = head.get(it.organisationId)!;
      const chain: ChainPosition = { sequence: h.sequence + 1, previousSeal: h.seal, recordedAt: new Date().toISOString() };
      const record = assembleRecord(it.parts, chain);
      const seal = createHash('sha256').update(record).digest('hex');
      head.set(it.organisationId, { sequence: chain.sequence, seal });
      const row: VerdictRow = {
        ...it.row,
        sequence: chain.sequence,
        seal,
        previous_seal: chain.previousSeal,
        signature: signSeal(key, seal),
        kid: key.kid,
        recorded_at: chain.recordedAt,
      };
      const view = verdictView(row);
      const body = JSON.stringify(view);
      outcomes.set(qd, { kind: 'created', status: 201, body, view });
      lots.set(lot, { organisation_id: it.organisationId, product_id: row.product_id, lot_code: row.lot_code, id: row.id, decision: row.decision, first_sample_verdict_id: first });
      rows.verdicts.push(verdictValues(row, record));
      if (claim) rows.replies.push(storedReplyRow(claim, 201, body, row.id));
      for (const d of deliveriesFor(view, it.organisationId, read.endpoints, this.config.publicUrl)) {
        rows.deliveries.push(deliveryValues({ ...d, organisationId: it.organisationId, verdictId: row.id }));
      }
      const mail = alertEmailFor(view, it.alertRecipients, this.config.publicUrl);
      if (mail) rows.emails.push(emailValues({ id: randomUUID(), organisationId: it.organisationId, verdictId: row.id, ...mail }));
    }
    return { outcomes, rows };
  }
}

const appenders = new WeakMap<Sequelize, Appender>();

/** Seals the verdict, links it into its organisation's chain and stores it (group commit). */
export function appendVerdict(sequelize: Sequelize, config: Config, item: PendingVerdict): Promise<AppendOutcome> {
  let a = appenders.get(sequelize);
  if (!a) appenders.set(sequelize, (a = new Appender(sequelize, config)));
  return a.append(item);
}
