// API keys (admin): list, issue (the secret comes back once and is only kept in memory until the
// admin closes the panel), revoke.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { useRequestState } from './request-state';
import type { components } from '../../../shared/api/schema';

export type ApiKey = components['schemas']['ApiKey'];
export type Scope = components['schemas']['Scope'];

export const SCOPE_TEXT: Record<Scope, string> = {
  'lots:submit': 'Submit lots for a verdict',
  'verdicts:read': 'Read verdicts and export them',
  'products:write': 'Create and change products',
  'audit:read': 'Read the ledger and the audit trail',
  'keys:manage': 'Manage API keys and see usage',
};

export const useKeysStore = defineStore('keys', () => {
  const items = ref<ApiKey[]>([]);
  const { loading, problem, track } = useRequestState();

  async function load(): Promise<void> {
    await track(async () => {
      items.value = (await call(api.GET('/v1/api-keys'))).items;
    });
  }
  async function create(input: { name: string; scopes: Scope[]; expiresAt: string | null }): Promise<{ key: ApiKey; secret: string }> {
    const res = await call(api.POST('/v1/api-keys', { body: input }));
    items.value = [res.key, ...items.value];
    return res;
  }
  async function revoke(id: string): Promise<void> {
    const k = await call(api.DELETE('/v1/api-keys/{keyId}', { params: { path: { keyId: id } } }));
    items.value = items.value.map((x) => (x.id === id ? k : x));
  }
  return { items, loading, problem, load, create, revoke };
});
