// Who is signed in. The session itself is the HttpOnly cookie the sign-in reply sets (signIn);
// this store only remembers what getSession said about it, and forgets it on sign-out or any 401.
import { defineStore } from 'pinia';
import { computed, ref } from 'vue';
import { api, call, onUnauthorised } from '../api/client';
import { ApiError } from '../api/problem';
import type { components } from '../../../shared/api/schema';
import type { Role } from '../lib/navigation';

export type SessionInfo = components['schemas']['SessionInfo'];

export const useSessionStore = defineStore('session', () => {
  const me = ref<SessionInfo | null>(null);
  const checked = ref(false);
  const role = computed<Role | null>(() => me.value?.user.role ?? null);
  const signedIn = computed(() => role.value !== null);

  onUnauthorised(() => {
    me.value = null;
  });

  async function load(): Promise<void> {
    try {
      me.value = await call(api.GET('/v1/session'));
    } catch (err) {
      if (!(err instanceof ApiError) || (err.status !== 401 && err.status !== 403)) throw err;
      me.value = null;
    } finally {
      checked.value = true;
    }
  }

  async function signIn(email: string, password: string): Promise<void> {
    me.value = await call(api.POST('/v1/session', { body: { email, password } }));
    checked.value = true;
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
