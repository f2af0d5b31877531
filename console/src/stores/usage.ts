// Usage per key per UTC day (admin).
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { useRequestState } from './request-state';
import type { components } from '../../../shared/api/schema';

export type UsageReport = components['schemas']['UsageReport'];

export const useUsageStore = defineStore('usage', () => {
  const report = ref<UsageReport | null>(null);
  const { loading, problem, track } = useRequestState();
  async function load(range: { from: string; to: string; keyId?: string }): Promise<void> {
    await track(async () => {
      const query: { from: string; to: string; keyId?: string } = { from: range.from, to: range.to };
      if (range.keyId) query.keyId = range.keyId;
      report.value = await call(api.GET('/v1/usage', { params: { query } }));
    });
  }
  return { report, loading, problem, load };
});
