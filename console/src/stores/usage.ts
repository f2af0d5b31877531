// Usage per key per UTC day (admin).
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { toProblem, type Problem } from '../api/problem';
import type { components } from '../../../shared/api/schema';

export type UsageReport = components['schemas']['UsageReport'];

export const useUsageStore = defineStore('usage', () => {
  const report = ref<UsageReport | null>(null);
  const loading = ref(false);
  const problem = ref<Problem | null>(null);
  async function load(range: { from: string; to: string; keyId?: string }): Promise<void> {
    loading.value = true;
    problem.value = null;
    try {
      const query: { from: string; to: string; keyId?: string } = { from: range.from, to: range.to };
      if (range.keyId) query.keyId = range.keyId;
      report.value = await call(api.GET('/v1/usage', { params: { query } }));
    } catch (err) {
      problem.value = toProblem(err);
    } finally {
      loading.value = false;
    }
  }
  return { report, loading, problem, load };
});
