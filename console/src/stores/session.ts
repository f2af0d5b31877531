// Who is signed in. The session itself is the HttpOnly cookie the sign-in reply sets; this store
// only remembers what GET /v1/me said about it, and forgets it on sign-out or on any 401.
import { defineStore } from 'pinia';
import { computed, ref } from 'vue';
import { api, call, onUnauthorised } from '../api/client';
import { ApiError } from '../api/problem';
import type { components } from '../../../shared/api/schema';
import type { Role } from '../lib/navigation';

export type Caller = components['schemas']['Caller'];

export const useSessionStore = defineStore('session', () => {
  const me = ref<Caller | null>(null);
  const checked = ref(false);
  const role = computed<Role | null>(() => (me.value?.kind === 'session' ? (me.value.role ?? null) : null));
  const signedIn = computed(() => role.value !== null);

  onUnauthorised(() => {
    me.value = null;
  });

  async function load(): Promise<void> {
    try {
      me.value = await call(api.GET('/v1/me'));
    } catch (err) {
      if (!(err instanceof ApiError) || (err.status !== 401 && err.status !== 403)) throw err;
      me.value = null;
    } finally {
      checked.value = true;
    }
  }

  async function signIn(email: string, password: string): Promise<void> {
    await call(api.POST('/v1/session', { body: { email, password } }));
    await load();
  }

  async function signOut(): Promise<void> {
    try {
      await call(api.DELETE('/v1/session'));
    } finally {
      me.value = null;
    }
  }

  return { me, checked, role, signedIn, load, signIn, signOut };
});
