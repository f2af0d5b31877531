// The development mailbox: e-mail the local SMTP fake captured (404 on production servers).
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { toProblem, type Problem } from '../api/problem';
import type { components } from '../../../shared/api/schema';

export type DevMail = components['schemas']['DevMail'];

export const useMailboxStore = defineStore('mailbox', () => {
  const items = ref<DevMail[]>([]);
  const loading = ref(false);
  const problem = ref<Problem | null>(null);
  async function load(): Promise<void> {
    loading.value = true;
    problem.value = null;
    try {
      items.value = (await call(api.GET('/v1/dev/mailbox'))).items;
    } catch (err) {
      problem.value = toProblem(err);
    } finally {
      loading.value = false;
    }
  }
  return { items, loading, problem, load };
});
