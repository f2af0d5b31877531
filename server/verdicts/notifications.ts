// What a new verdict tells the outside world: webhook events for the organisation's endpoints and
// an alert e-mail to the product's recipients when the lot is nonconforming. Built inside the
// ledger transaction (as outbox rows); delivered by the jobs in server/jobs.
import { randomUUID } from 'node:crypto';
import type { VerdictView, WithdrawalRecord, WithdrawalView } from './verdict-records';

// ledger.checkpoint: each new signed checkpoint of the organisation's ledger (server/ledger/witnesses-outbox.ts).
// verdict.withdrawn: a verdict was withdrawn by a sealed withdrawal (withdrawals.ts).
export const WEBHOOK_EVENTS = ['verdict.created', 'verdict.nonconforming', 'verdict.second-sample-required', 'verdict.withdrawn', 'ledger.checkpoint'] as const;
export type WebhookEventType = (typeof WEBHOOK_EVENTS)[number];
export const TEST_EVENT = 'webhook.test';

export interface EndpointSubscription {
  id: string;
  organisation_id: string;
  events: string[];
}

export function eventsFor(decision: VerdictView['decision']): WebhookEventType[] {
  const out: WebhookEventType[] = ['verdict.created'];
  if (decision === 'nonconforming') out.push('verdict.nonconforming');
  if (decision === 'second-sample-required') out.push('verdict.second-sample-required');
  return out;
}

/** The event body (Standard Webhooks style: type, timestamp, data). */
export function webhookPayload(type: string, view: VerdictView, publicUrl: string): string {
  return JSON.stringify({
    type,
    timestamp: view.recordedAt,
    data: {
      verdictId: view.id,
      decision: view.decision,
      product: { id: view.product.id, sku: view.product.sku, name: view.product.name },
      lot: { lotCode: view.lot.lotCode, line: view.lot.line, packedAt: view.lot.packedAt, lotSize: view.lot.lotSize, clientReference: view.lot.clientReference },
      firstSampleVerdictId: view.firstSampleVerdictId,
      seal: view.seal.value,
      sequence: view.seal.sequence,
      url: `${publicUrl}/v1/verdicts/${view.id}`,
      caution: view.caution,
    },
  });
}

export function deliveriesFor(
  view: VerdictView,
  organisationId: string,
  endpoints: EndpointSubscription[],
  publicUrl: string,
): { id: string; endpointId: string; eventType: string; payload: string }[] {
  const out = [];
  for (const type of eventsFor(view.decision)) {
    for (const ep of endpoints) {
      if (ep.organisation_id !== organisationId || !ep.events.includes(type)) continue;
      out.push({ id: randomUUID(), endpointId: ep.id, eventType: type, payload: webhookPayload(type, view, publicUrl) });
    }
  }
  return out;
}

export function alertEmailFor(view: VerdictView, recipients: string[], publicUrl: string): { recipients: string[]; subject: string; text: string } | null {
  if (view.decision !== 'nonconforming' || recipients.length === 0) return null;
  const failed = view.result.criteria.filter((c) => c.passed === false).map((c) => `  - ${c.sentence}`);
  const text = [
    `Lot ${view.lot.lotCode} of ${view.product.name} (${view.product.sku})${view.lot.line ? ` from ${view.lot.line}` : ''} is nonconforming.`,
    '',
    'Criteria not met:',
    ...(failed.length > 0 ? failed : ['  (see the verdict)']),
    '',
    `Verdict: ${publicUrl}/verdicts/${view.id}`,
    `Seal: ${view.seal.value}`,
    '',
    view.caution,
  ].join('\n');
  return { recipients, subject: `Lotproof: lot ${view.lot.lotCode} (${view.product.sku}) is nonconforming`, text };
}

/** The `verdict.withdrawn` deliveries of a withdrawal, one per endpoint that subscribed to it. */
export function withdrawalDeliveries(
  record: WithdrawalRecord,
  view: WithdrawalView,
  endpoints: EndpointSubscription[],
  publicUrl: string,
): { id: string; endpointId: string; eventType: string; payload: string }[] {
  const type: WebhookEventType = 'verdict.withdrawn';
  const payload = JSON.stringify({
    type,
    timestamp: view.recordedAt,
    data: {
      verdictId: record.verdict.id,
      withdrawalId: view.id,
      reason: view.reason,
      withdrawnBy: view.withdrawnBy,
      verdict: { seal: record.verdict.seal, sequence: record.verdict.sequence, decision: record.verdict.decision },
      product: record.verdict.product,
      lot: { lotCode: record.verdict.lotCode },
      seal: view.seal.value,
      sequence: view.seal.sequence,
      url: `${publicUrl}/v1/verdicts/${record.verdict.id}`,
    },
  });
  return endpoints
    .filter((ep) => ep.organisation_id === record.organisation.id && ep.events.includes(type))
    .map((ep) => ({ id: randomUUID(), endpointId: ep.id, eventType: type, payload }));
}
