// Withdrawing a verdict (issue 16): a sealed, signed withdrawal record appended to the
// organisation's chain — the next position, linked to the seal before it, a leaf of the same Merkle
// tree — naming the verdict it withdraws, who withdrew it and why. The verdict's own row and record
// never change; every read marks it withdrawn by looking its withdrawal up (verdict-records.ts).
//
// One transaction under the chain's advisory lock (the lock of ledger.ts, so verdicts and
// withdrawals take positions one after the other): the head is read from ledger_entries, the
// Idempotency-Key's stored reply and the verdict's withdrawal are read again under the lock, and the
// withdrawal, its stored reply, its webhook deliveries (`verdict.withdrawn`) and its audit event are
// inserted together. Withdrawals are rare, so they are not batched like lots. Raw SQL on a borrowed
// connection (DEVELOPERS.md, "Persistence": a table without a model, written with the ledger).
import { createHash, randomUUID } from 'node:crypto';
import { QueryTypes, type Sequelize } from 'sequelize';
import type { Config } from '../config';
import { Conflict, InvalidInput, NotAllowed, NotFound, type Failure } from '../core/errors';
import { findPrior, keyReused, priorRepliesUnderLock, replayOrRefuse, STORED_REPLY_COLUMNS, storedReplyRow, type IdempotencyClaim, type PriorReply } from '../core/idempotency';
import type { Principal } from '../core/principal';
import { withConnection, type PgResult } from '../db/raw';
import { auditActor, recordAuditOn } from '../identity/audit-trail';
import { canonicalJson } from './canonical';
import { ledgerEvents } from './ledger';
import { LOCK_CLASS } from './ledger-sql';
import { submitterOf } from './lot-submitter';
import { withdrawalDeliveries } from './notifications';
import { currentSigningKey, publishSigningKey, signSeal } from './signing-keys';
import { WITHDRAWAL_RECORD_FORMAT, withdrawalView, type WithdrawalRecord } from './verdict-records';

export const WITHDRAW_OPERATION = 'withdrawVerdict';
export const REASON_MAX = 500;

export interface WithdrawalOutcome {
  status: number;
  body: string;
  replayed: boolean;
  withdrawalId?: string;
}

interface VerdictHead {
  id: string;
  seal: string;
  sequence: string;
  lot_code: string;
  product_id: string;
  product_sku: string;
  decision: string;
}
interface PriorWithdrawal {
  id: string;
  recorded_at: string;
  reason: string;
}

/** The 409 of a verdict withdrawn before, naming that withdrawal. */
function alreadyWithdrawn(verdictId: string, w: PriorWithdrawal): Conflict {
  const at = new Date(w.recorded_at).toISOString();
  const detail = `verdict ${verdictId} was withdrawn at ${at} (withdrawal ${w.id}); a verdict is withdrawn once`;
  return new Conflict(detail, 'verdict-already-withdrawn', [{ field: '/verdictId', detail }], {
    withdrawal: { id: w.id, recordedAt: at, reason: w.reason, href: `/v1/verdicts/${verdictId}` },
  });
}

/** The reason as given, or a 400 naming it when it says nothing (white space only). */
function checkedReason(reason: string): string {
  if (reason.trim() === '') throw new InvalidInput('say why the verdict is withdrawn', [{ field: '/reason', detail: 'must not be blank' }]);
  if ([...reason].length > REASON_MAX) throw new InvalidInput(`a reason has at most ${REASON_MAX} characters`, [{ field: '/reason', detail: `at most ${REASON_MAX} characters` }]);
  return reason;
}

const VERDICT = `SELECT v.id, v.seal, v.sequence, v.lot_code, v.product_id, v.product_sku, v.decision FROM verdicts v WHERE v.organisation_id = $1 AND v.id = $2`;
const PRIOR = `SELECT id, to_json(recorded_at) #>> '{}' AS recorded_at, reason FROM verdict_withdrawals WHERE organisation_id = $1 AND verdict_id = $2`;

/**
 * Withdraws the verdict: 201 with the sealed withdrawal, a replay for a key seen before (422 when
 * the key was used for another request), 404 for a verdict not of the caller's organisation, 409
 * for one withdrawn before. Nothing is stored for a refusal.
 */
export async function withdrawVerdict(
  sequelize: Sequelize,
  config: Pick<Config, 'dataDir' | 'verdicts' | 'publicUrl'>,
  principal: Principal,
  input: { verdictId: string; reason: string },
  claim: IdempotencyClaim | null,
  ip: string | null,
): Promise<WithdrawalOutcome> {
  if (claim) {
    const known = await findPrior(sequelize, claim);
    if (known) return replayOrRefuse(known, claim);
  }
  const reason = checkedReason(input.reason);
  const org = principal.organisationId;
  const notFound = () => {
    const e = new NotFound(`no verdict ${input.verdictId} in your organisation`);
    e.fields.push({ field: '/verdictId', detail: 'no such verdict in your organisation' });
    return e;
  };
  // Checked before the lock (a refusal costs no lock) and again under it (a concurrent withdrawal).
  const read = <T extends object>(text: string, bind: unknown[]) => sequelize.query<T>(text, { bind, type: QueryTypes.SELECT }).then((r) => r[0]);
  const [verdict, prior, organisation] = await Promise.all([
    read<VerdictHead>(VERDICT, [org, input.verdictId]),
    read<PriorWithdrawal>(PRIOR, [org, input.verdictId]),
    read<{ name: string }>('SELECT name FROM organisations WHERE id = $1', [org]),
  ]);
  if (!verdict || !organisation) throw notFound();
  if (prior) throw alreadyWithdrawn(verdict.id, prior);
  const withdrawnBy = await submitterOf(sequelize, principal);
  if (!withdrawnBy) throw new NotAllowed('a withdrawal names who made it: use a console session or an API key of your organisation');
  const actor = await auditActor({ principal, ip });
  const key = currentSigningKey(config);
  await publishSigningKey(sequelize, key);

  const outcome = await withConnection(sequelize, async (conn): Promise<WithdrawalOutcome | Failure> => {
    let open = true;
    try {
      const read = `
        SELECT
          (SELECT json_build_object('sequence', e.sequence, 'seal', e.seal) FROM ledger_entries e
             WHERE e.organisation_id = ${conn.escapeLiteral(org)}::uuid ORDER BY e.sequence DESC LIMIT 1) AS head,
          ${priorRepliesUnderLock(conn.escapeLiteral(JSON.stringify(claim ? [[org, claim.key]] : [])), conn.escapeLiteral(WITHDRAW_OPERATION))} AS keys,
          (SELECT json_build_object('id', w.id, 'recorded_at', to_json(w.recorded_at) #>> '{}', 'reason', w.reason) FROM verdict_withdrawals w
             WHERE w.organisation_id = ${conn.escapeLiteral(org)}::uuid AND w.verdict_id = ${conn.escapeLiteral(verdict.id)}::uuid) AS prior,
          (SELECT coalesce(json_agg(json_build_object('id', w.id, 'organisation_id', w.organisation_id, 'events', w.events)), '[]')
             FROM webhook_endpoints w WHERE w.organisation_id = ${conn.escapeLiteral(org)}::uuid AND w.enabled AND w.deleted_at IS NULL) AS endpoints`;
      const results = (await conn.query(`BEGIN;\nSELECT pg_advisory_xact_lock(${LOCK_CLASS}, hashtext(${conn.escapeLiteral(org)}));\n${read}`)) as PgResult[];
      const parse = <T>(v: unknown): T => (typeof v === 'string' ? JSON.parse(v) : v) as T;
      const raw = results[results.length - 1]!.rows[0]!;
      const head = parse<{ sequence: number | string; seal: string }>(raw.head);
      const keys = parse<PriorReply[]>(raw.keys);
      const priorUnderLock = parse<PriorWithdrawal | null>(raw.prior);
      const endpoints = parse<{ id: string; organisation_id: string; events: string[] }[]>(raw.endpoints);
      if (claim && keys[0]) {
        await conn.query('ROLLBACK');
        open = false;
        return keys[0].request_hash === claim.requestHash ? { status: keys[0].status, body: keys[0].response, replayed: true } : keyReused();
      }
      if (priorUnderLock) {
        await conn.query('ROLLBACK');
        open = false;
        return alreadyWithdrawn(verdict.id, priorUnderLock);
      }
      const record: WithdrawalRecord = {
        format: WITHDRAWAL_RECORD_FORMAT,
        withdrawalId: randomUUID(),
        organisation: { id: org, name: organisation.name },
        sequence: Number(head.sequence) + 1,
        previousSeal: head.seal,
        recordedAt: new Date().toISOString(),
        verdict: {
          id: verdict.id,
          seal: verdict.seal,
          sequence: Number(verdict.sequence),
          lotCode: verdict.lot_code,
          product: { id: verdict.product_id, sku: verdict.product_sku },
          decision: verdict.decision,
        },
        reason,
        withdrawnBy,
      };
      const text = canonicalJson(record);
      const seal = createHash('sha256').update(text, 'utf8').digest('hex');
      const signature = signSeal(key, seal);
      const view = withdrawalView(record, { value: seal, signature, kid: key.kid });
      const body = JSON.stringify(view);
      await conn.query(
        `INSERT INTO verdict_withdrawals (id, organisation_id, sequence, seal, previous_seal, signature, kid, record, verdict_id, reason, withdrawn_by, recorded_at)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12)`,
        [record.withdrawalId, org, record.sequence, seal, record.previousSeal, signature, key.kid, text, verdict.id, reason, JSON.stringify(withdrawnBy), record.recordedAt],
      );
      if (claim) {
        const columns = STORED_REPLY_COLUMNS.map(([c]) => c).join(', ');
        const values = STORED_REPLY_COLUMNS.map(([, cast], i) => `$${i + 1}${cast}`).join(', ');
        await conn.query(`INSERT INTO idempotency_records (${columns}) VALUES (${values})`, storedReplyRow(claim, 201, body, record.withdrawalId));
      }
      const deliveries = withdrawalDeliveries(record, view, endpoints, config.publicUrl);
      for (const d of deliveries) {
        await conn.query(
          'INSERT INTO webhook_deliveries (id, organisation_id, endpoint_id, verdict_id, event_type, payload) VALUES ($1, $2, $3, $4, $5, $6)',
          [d.id, org, d.endpointId, verdict.id, d.eventType, d.payload],
        );
      }
      await recordAuditOn(conn, org, actor, 'verdict.withdrawn', { kind: 'verdict', id: verdict.id }, {
        withdrawalId: record.withdrawalId,
        reason,
        lotCode: verdict.lot_code,
        productSku: verdict.product_sku,
        decision: verdict.decision,
        seal,
        sequence: record.sequence,
      });
      await conn.query('COMMIT');
      open = false;
      if (deliveries.length > 0) ledgerEvents.emit('appended');
      return { status: 201, body, replayed: false, withdrawalId: record.withdrawalId };
    } catch (err) {
      if (open) await conn.query('ROLLBACK').catch(() => {});
      throw err;
    }
  });
  if (outcome instanceof Error) throw outcome;
  return outcome;
}
