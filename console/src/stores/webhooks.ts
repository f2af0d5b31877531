// Webhook endpoints (admin): list, add (the signing secret comes back once), change, remove,
// deliveries with every attempt, and a test event.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call, idempotencyKey } from '../api/client';
import { useRequestState } from './request-state';
import type { components } from '../../../shared/api/schema';

export type WebhookEndpoint = components['schemas']['WebhookEndpoint'];
export type WebhookInput = components['schemas']['WebhookInput'];
export type WebhookDelivery = components['schemas']['WebhookDelivery'];
export type WebhookEvent = components['schemas']['WebhookEvent'];

export const useWebhooksStore = defineStore('webhooks', () => {
  const items = ref<WebhookEndpoint[]>([]);
  const { loading, problem, track } = useRequestState();

  async function load(): Promise<void> {
    await track(async () => {
      items.value = (await call(api.GET('/v1/webhooks'))).items;
    });
  }
  async function create(body: WebhookInput) {
    const created = await call(api.POST('/v1/webhooks', { body, params: { header: { 'Idempotency-Key': idempotencyKey() } } }));
    items.value = [created, ...items.value];
    return created;
  }
  async function setEnabled(id: string, enabled: boolean): Promise<void> {
    const w = await call(api.PATCH('/v1/webhooks/{webhookId}', { params: { path: { webhookId: id } }, body: { enabled } }));
    items.value = items.value.map((x) => (x.id === id ? w : x));
  }
  async function remove(id: string): Promise<void> {
    await call(api.DELETE('/v1/webhooks/{webhookId}', { params: { path: { webhookId: id } } }));
    items.value = items.value.filter((x) => x.id !== id);
  }
  async function deliveries(id: string): Promise<WebhookDelivery[]> {
    return (await call(api.GET('/v1/webhooks/{webhookId}/deliveries', { params: { path: { webhookId: id }, query: { limit: 50 } } }))).items;
  }
  async function sendTest(id: string): Promise<WebhookDelivery> {
    return call(api.POST('/v1/webhooks/{webhookId}/test', { params: { path: { webhookId: id } } }));
  }
  return { items, loading, problem, load, create, setEnabled, remove, deliveries, sendTest };
});
