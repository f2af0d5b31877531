// The ledger walk (verifyLedger) and the NDJSON export of sealed documents for the offline verifier.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { toProblem, type Problem } from '../api/problem';
import type { components } from '../../../shared/api/schema';

export type LedgerCheck = components['schemas']['LedgerCheck'];

export const useLedgerStore = defineStore('ledger', () => {
  const result = ref<LedgerCheck | null>(null);
  const checkedAt = ref<Date | null>(null);
  const loading = ref(false);
  const problem = ref<Problem | null>(null);
  async function verify(): Promise<void> {
    loading.value = true;
    problem.value = null;
    try {
      result.value = await call(api.GET('/v1/ledger/verify'));
      checkedAt.value = new Date();
    } catch (err) {
      problem.value = toProblem(err);
    } finally {
      loading.value = false;
    }
  }
  return { result, checkedAt, loading, problem, verify };
});
