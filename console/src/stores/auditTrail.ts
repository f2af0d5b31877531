// The admin audit trail, newest first, paged by cursor.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { useRequestState } from './request-state';
import type { components } from '../../../shared/api/schema';

export type AuditEvent = components['schemas']['AuditEvent'];
export type AuditAction = components['schemas']['AuditAction'];

export const useAuditTrailStore = defineStore('auditTrail', () => {
  const items = ref<AuditEvent[]>([]);
  const nextCursor = ref<string | null>(null);
  const { loading, problem, track } = useRequestState();
  async function load(action: AuditAction | '', more = false): Promise<void> {
    await track(async () => {
      const query: { limit: number; action?: AuditAction; cursor?: string } = { limit: 50 };
      if (action) query.action = action;
      if (more && nextCursor.value) query.cursor = nextCursor.value;
      const res = await call(api.GET('/v1/audit-events', { params: { query } }));
      items.value = more ? [...items.value, ...res.items] : res.items;
      nextCursor.value = res.nextCursor;
    });
  }
  return { items, nextCursor, loading, problem, load };
});
