// Witnesses of an organisation's ledger: the people it names (an auditor, a customer, an inspector)
// who receive every new checkpoint by e-mail and/or through one of its webhook endpoints subscribed
// to `ledger.checkpoint`, so copies of past checkpoints live outside the packer's systems. What
// they receive is written by witnesses-outbox.ts in each checkpoint's own transaction.
//
// Added and removed by admins; each change is written to the audit trail in its own transaction.
import { QueryTypes, type Transaction } from 'sequelize';
import type { components } from '../../shared/api/schema';
import { InvalidInput, NotFound, Refused } from '../core/errors';
import type { Principal } from '../core/principal';
// The organisation's audit trail is the identity area's; witness changes are written to it too.
import { recordAudit } from '../identity/audit-trail';
import { LedgerWitness } from './witnesses-model';

type WitnessView = components['schemas']['Witness'];
type WitnessInput = components['schemas']['WitnessInput'];

export const CHECKPOINT_EVENT = 'ledger.checkpoint';

/** Where a request came from, for the audit trail. */
export interface RequestOrigin {
  ip?: string | null;
}

interface EndpointRow {
  id: string;
  url: string;
  enabled: boolean;
  events: string[];
  deleted_at: Date | null;
}

const sequelizeOf = () => LedgerWitness.sequelize!;
const inTransaction = <T>(work: (t: Transaction) => Promise<T>): Promise<T> => sequelizeOf().transaction(work);

/**
 * The organisation's webhook endpoints by id. Raw SQL on the webhooks area's table (as the ledger
 * appender reads it): the ledger area only reads where an endpoint points and what it receives.
 */
async function endpointsOf(organisationId: string, ids: string[], transaction?: Transaction): Promise<Map<string, EndpointRow>> {
  if (ids.length === 0) return new Map();
  const rows = await sequelizeOf().query<EndpointRow>(
    'SELECT id, url, enabled, events, deleted_at FROM webhook_endpoints WHERE organisation_id = $1 AND id = ANY($2::uuid[])',
    { bind: [organisationId, ids], type: QueryTypes.SELECT, transaction },
  );
  return new Map(rows.map((r) => [r.id, r]));
}

const receivesCheckpoints = (e: EndpointRow | undefined): boolean => Boolean(e && e.enabled && !e.deleted_at && e.events.includes(CHECKPOINT_EVENT));

function view(w: LedgerWitness, endpoints: Map<string, EndpointRow>): WitnessView {
  const e = w.webhookId ? endpoints.get(w.webhookId) : undefined;
  return {
    id: w.id,
    name: w.name,
    role: w.role,
    email: w.email,
    webhook: w.webhookId ? { id: w.webhookId, url: e && !e.deleted_at ? e.url : null, receivesCheckpoints: receivesCheckpoints(e) } : null,
    createdAt: w.createdAt.toISOString(),
  };
}

export async function listWitnesses(principal: Principal): Promise<{ items: WitnessView[] }> {
  const rows = await LedgerWitness.findAll({ where: { organisationId: principal.organisationId, removedAt: null }, order: [['createdAt', 'ASC'], ['id', 'ASC']] });
  const endpoints = await endpointsOf(principal.organisationId, [...new Set(rows.flatMap((w) => (w.webhookId ? [w.webhookId] : [])))]);
  return { items: rows.map((w) => view(w, endpoints)) };
}

/** Trims a text field; an empty one is refused naming it (the schema's minLength counts spaces). */
function text(value: string, field: string): string {
  const t = value.trim();
  if (!t) throw new InvalidInput(`${field.slice(1)} must not be blank`, [{ field, detail: 'blank' }]);
  return t;
}

export async function addWitness(principal: Principal, input: WitnessInput, from: RequestOrigin = {}): Promise<WitnessView> {
  const name = text(input.name, '/name');
  const role = text(input.role, '/role');
  const email = input.email?.trim() || null;
  const webhookId = input.webhookId ?? null;
  if (!email && !webhookId) {
    throw new InvalidInput('a witness needs an e-mail address, a webhook endpoint (webhookId), or both', [
      { field: '/email', detail: 'give an e-mail address or a webhookId' },
    ]);
  }
  return inTransaction(async (transaction) => {
    const endpoints = await endpointsOf(principal.organisationId, webhookId ? [webhookId] : [], transaction);
    if (webhookId) {
      const e = endpoints.get(webhookId);
      if (!e || e.deleted_at) {
        throw new Refused('not-found', 'your organisation has no webhook endpoint with this id', [{ field: '/webhookId', detail: 'no such endpoint' }]);
      }
      if (!e.events.includes(CHECKPOINT_EVENT)) {
        throw new Refused('webhook-not-subscribed', `the endpoint does not receive ${CHECKPOINT_EVENT} events: add that event to it first (PATCH /v1/webhooks/{webhookId})`, [
          { field: '/webhookId', detail: `not subscribed to ${CHECKPOINT_EVENT}` },
        ]);
      }
    }
    const w = await LedgerWitness.create({ organisationId: principal.organisationId, name, role, email, webhookId }, { transaction });
    const v = view(w, endpoints);
    await recordAudit(principal.organisationId, { principal, ip: from.ip ?? null }, 'witness.added', { kind: 'witness', id: w.id }, {
      name, role, email, webhookId,
    }, transaction);
    return v;
  });
}

export async function removeWitness(principal: Principal, id: string, from: RequestOrigin = {}): Promise<void> {
  await inTransaction(async (transaction) => {
    // Locked so two removals of one witness write one audit event.
    const w = await LedgerWitness.findOne({ where: { id, organisationId: principal.organisationId, removedAt: null }, transaction, lock: transaction.LOCK.UPDATE });
    if (!w) throw new NotFound('your organisation has no witness with this id');
    w.removedAt = new Date();
    w.updatedAt = w.removedAt;
    await w.save({ transaction });
    await recordAudit(principal.organisationId, { principal, ip: from.ip ?? null }, 'witness.removed', { kind: 'witness', id: w.id }, {
      name: w.name, role: w.role, email: w.email, webhookId: w.webhookId,
    }, transaction);
  });
}
