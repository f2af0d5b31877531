// Withdrawing a sealed verdict (withdrawVerdict): a sealed withdrawal record with its reason is
// appended to the ledger; the verdict itself is never changed. One idempotency key per attempt in
// the dialog, so a retry after a lost reply returns the same withdrawal instead of a 409.
import { defineStore } from 'pinia';
import { api, call, idempotencyKey } from '../api/client';
import type { components } from '../../../shared/api/schema';

export type Withdrawal = components['schemas']['Withdrawal'];

export const useWithdrawalsStore = defineStore('withdrawals', () => {
  async function withdraw(verdictId: string, reason: string, key: string): Promise<Withdrawal> {
    return call(
      api.POST('/v1/verdicts/{verdictId}/withdrawal', {
        params: { path: { verdictId }, header: { 'Idempotency-Key': key } },
        body: { reason },
      }),
    );
  }
  return { withdraw, newKey: idempotencyKey };
});
