// Joining and recovering an account: invitation links and password resets (no session needed).
import { defineStore } from 'pinia';
import { api, call } from '../api/client';

export const useAccountStore = defineStore('account', () => {
  async function inspectInvitation(token: string) {
    return call(api.POST('/v1/invitations/inspect', { body: { token } }));
  }
  async function acceptInvitation(token: string, password: string, name: string) {
    return call(api.POST('/v1/invitations/accept', { body: { token, password, ...(name.trim() ? { name: name.trim() } : {}) } }));
  }
  async function requestPasswordReset(email: string) {
    await call(api.POST('/v1/password-resets', { body: { email } }));
  }
  async function completePasswordReset(token: string, password: string) {
    await call(api.POST('/v1/password-resets/complete', { body: { token, password } }));
  }
  return { inspectInvitation, acceptInvitation, requestPasswordReset, completePasswordReset };
});
