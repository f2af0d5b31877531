// The ledger walk (verifyLedger) and the NDJSON export of sealed documents for the offline verifier.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { useRequestState } from './request-state';
import type { components } from '../../../shared/api/schema';

export type LedgerCheck = components['schemas']['LedgerCheck'];

export const useLedgerStore = defineStore('ledger', () => {
  const result = ref<LedgerCheck | null>(null);
  const checkedAt = ref<Date | null>(null);
  const { loading, problem, track } = useRequestState();
  async function verify(): Promise<void> {
    await track(async () => {
      result.value = await call(api.GET('/v1/ledger/verify'));
      checkedAt.value = new Date();
    });
  }
  return { result, checkedAt, loading, problem, verify };
});
