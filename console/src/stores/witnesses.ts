// Witnesses of the ledger: who receives every new checkpoint (by e-mail, or through a webhook
// endpoint subscribed to ledger.checkpoint). Everyone on the ledger page sees them; admins add and remove.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call, idempotencyKey } from '../api/client';
import { useRequestState } from './request-state';
import type { components } from '../../../shared/api/schema';

export type Witness = components['schemas']['Witness'];
export type WitnessInput = components['schemas']['WitnessInput'];

export const useWitnessesStore = defineStore('witnesses', () => {
  const items = ref<Witness[]>([]);
  const { loading, problem, track } = useRequestState();

  async function load(): Promise<void> {
    await track(async () => {
      items.value = (await call(api.GET('/v1/ledger/witnesses'))).items;
    });
  }
  async function add(body: WitnessInput): Promise<Witness> {
    const w = await call(api.POST('/v1/ledger/witnesses', { body, params: { header: { 'Idempotency-Key': idempotencyKey() } } }));
    items.value = [...items.value, w];
    return w;
  }
  async function remove(id: string): Promise<void> {
    await call(api.DELETE('/v1/ledger/witnesses/{witnessId}', { params: { path: { witnessId: id } } }));
    items.value = items.value.filter((w) => w.id !== id);
  }
  return { items, loading, problem, load, add, remove };
});
