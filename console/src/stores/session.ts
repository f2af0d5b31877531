// Who is signed in. The session itself is the HttpOnly cookie the sign-in reply sets (signIn);
// this store only remembers what getSession said about it, and forgets it on sign-out or any 401.
import { defineStore } from 'pinia';
import { computed, ref } from 'vue';
import { api, call, onUnauthorised } from '../api/client';
import { ApiError } from '../api/problem';
import type { components } from '../../../shared/api/schema';
import { mayOpen, ROLES, type Role } from '../lib/navigation';

export type SessionInfo = components['schemas']['SessionInfo'];

export const useSessionStore = defineStore('session', () => {
  const me = ref<SessionInfo | null>(null);
  const checked = ref(false);
  /** Every role the user holds (one or more), in the order of ROLES; empty when signed out. */
  const roles = computed<Role[]>(() => {
    const held: readonly Role[] = me.value?.user.roles ?? (me.value ? [me.value.user.role] : []);
    return ROLES.filter((r) => held.includes(r));
  });
  /** The first of the roles (as `role` in the API): for views that name one; decisions use `has`. */
  const role = computed<Role | null>(() => roles.value[0] ?? null);
  const signedIn = computed(() => roles.value.length > 0);
  /** True when the user holds any one of these roles. */
  const has = (...wanted: Role[]): boolean => mayOpen(wanted, roles.value);

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

  return { me, checked, roles, role, has, signedIn, load, signIn, signOut };
});
