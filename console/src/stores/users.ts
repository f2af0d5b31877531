// Console users and invitations of the organisation (admin).
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { useRequestState } from './request-state';
import type { components } from '../../../shared/api/schema';
import type { Role } from '../lib/navigation';

export type ConsoleUser = components['schemas']['ConsoleUser'];
export type Invitation = components['schemas']['Invitation'];

export const useUsersStore = defineStore('users', () => {
  const users = ref<ConsoleUser[]>([]);
  const invitations = ref<Invitation[]>([]);
  const { loading, problem, track } = useRequestState();

  async function load(): Promise<void> {
    await track(async () => {
      const [u, i] = await Promise.all([call(api.GET('/v1/users')), call(api.GET('/v1/invitations'))]);
      users.value = u.items;
      invitations.value = i.items;
    });
  }
  async function invite(email: string, roles: Role[]): Promise<void> {
    const inv = await call(api.POST('/v1/invitations', { body: { email, roles } }));
    invitations.value = [inv, ...invitations.value.filter((x) => !(x.email === inv.email && x.status === 'pending'))];
  }
  async function revokeInvitation(id: string): Promise<void> {
    const inv = await call(api.DELETE('/v1/invitations/{invitationId}', { params: { path: { invitationId: id } } }));
    invitations.value = invitations.value.map((x) => (x.id === id ? inv : x));
  }
  async function changeRoles(id: string, roles: Role[]): Promise<void> {
    const u = await call(api.PATCH('/v1/users/{userId}', { params: { path: { userId: id } }, body: { roles } }));
    users.value = users.value.map((x) => (x.id === id ? u : x));
  }
  async function remove(id: string): Promise<void> {
    await call(api.DELETE('/v1/users/{userId}', { params: { path: { userId: id } } }));
    users.value = users.value.filter((x) => x.id !== id);
  }
  return { users, invitations, loading, problem, load, invite, revokeInvitation, changeRoles, remove };
});
