// The identity area's ways of signing in, registered with the HTTP access layer: a bearer API key
// (api-key-store.ts) and a console session cookie (session-cookie.ts).
import { setBearerVerifier } from '../http/access';
import { verifyApiKey } from './api-key-store';
import { registerSessionResolver } from './session-cookie.http';

const REASONS = {
  malformed: 'The bearer credential is not a Lotproof API key.',
  unknown: 'The API key is not valid.',
  revoked: 'The API key has been revoked.',
  expired: 'The API key has expired.',
} as const;

/** Registers API keys and console sessions as the ways a request says who is calling. */
export function registerAuthentication(): void {
  setBearerVerifier(async (token) => {
    const check = await verifyApiKey(token);
    return check.ok ? check : { ok: false, detail: REASONS[check.reason] };
  });
  registerSessionResolver();
}
