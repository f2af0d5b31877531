// Products: the list (also feeding the pickers), one product, create and update.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call, idempotencyKey } from '../api/client';
import { useRequestState } from './request-state';
import type { components } from '../../../shared/api/schema';

export type Product = components['schemas']['Product'];
export type ProductInput = components['schemas']['ProductInput'];
export type ProductPatch = components['schemas']['ProductPatch'];

export const useProductsStore = defineStore('products', () => {
  const items = ref<Product[]>([]);
  const { loading, problem, track } = useRequestState();
  const loaded = ref(false);

  async function load(): Promise<void> {
    await track(async () => {
      const all: Product[] = [];
      let cursor: string | undefined;
      do {
        const res = await call(api.GET('/v1/products', { params: { query: { limit: 200, ...(cursor ? { cursor } : {}) } } }));
        all.push(...res.items);
        cursor = res.nextCursor ?? undefined;
      } while (cursor && all.length < 2000);
      items.value = all;
      loaded.value = true;
    });
  }

  async function ensure(): Promise<void> {
    if (!loaded.value && !loading.value) await load();
  }

  async function get(id: string): Promise<Product> {
    return call(api.GET('/v1/products/{productId}', { params: { path: { productId: id } } }));
  }

  async function create(body: ProductInput): Promise<Product> {
    const p = await call(api.POST('/v1/products', { body, params: { header: { 'Idempotency-Key': idempotencyKey() } } }));
    loaded.value = false;
    return p;
  }

  async function update(id: string, body: ProductPatch): Promise<Product> {
    const p = await call(api.PATCH('/v1/products/{productId}', { params: { path: { productId: id } }, body }));
    loaded.value = false;
    return p;
  }

  async function archive(id: string): Promise<void> {
    await call(api.DELETE('/v1/products/{productId}', { params: { path: { productId: id } } }));
    items.value = items.value.filter((p) => p.id !== id);
  }

  return { items, loading, loaded, problem, load, ensure, get, create, update, archive };
});
