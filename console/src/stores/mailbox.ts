// The development mailbox: e-mail the local SMTP fake captured (404 on production servers).
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { useRequestState } from './request-state';
import type { components } from '../../../shared/api/schema';

export type DevMail = components['schemas']['DevMail'];

export const useMailboxStore = defineStore('mailbox', () => {
  const items = ref<DevMail[]>([]);
  const { loading, problem, track } = useRequestState();
  async function load(): Promise<void> {
    await track(async () => {
      items.value = (await call(api.GET('/v1/dev/mailbox'))).items;
    });
  }
  return { items, loading, problem, load };
});
