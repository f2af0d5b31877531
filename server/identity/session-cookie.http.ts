// Console sessions over HTTP: the `lotproof_session` cookie (HttpOnly, SameSite=Strict, Secure on
// https) and its resolver. CSRF: a session-authenticated unsafe request (POST, PUT, PATCH, DELETE)
// must carry `X-Lotproof-Console: 1` — a cross-site page cannot add a custom header without a CORS
// preflight, and this server answers no CORS preflight.
import type { Request, Response } from 'express';
import { resolveSession } from './sessions';
import { addPrincipalResolver } from '../http/access';
import { ForbiddenProblem } from '../http/problem';

export const SESSION_COOKIE = 'lotproof_session';
export const CONSOLE_HEADER = 'x-lotproof-console';
const UNSAFE = new Set(['POST', 'PUT', 'PATCH', 'DELETE']);

function cookieToken(req: Request): string | null {
  const value = (req as Request & { cookies?: Record<string, unknown> }).cookies?.[SESSION_COOKIE];
  return typeof value === 'string' && value.length > 0 ? value : null;
}

export function setSessionCookie(res: Response, token: string, expiresAt: Date, publicUrl: string): void {
  res.cookie(SESSION_COOKIE, token, {
    httpOnly: true,
    sameSite: 'strict',
    secure: publicUrl.startsWith('https:'),
    path: '/',
    expires: expiresAt,
  });
}

export function clearSessionCookie(res: Response, publicUrl: string): void {
  res.clearCookie(SESSION_COOKIE, { httpOnly: true, sameSite: 'strict', secure: publicUrl.startsWith('https:'), path: '/' });
}

/** Where an app keeps its session idle timeout (app.locals), set by createApp from its configuration. */
export const IDLE_MINUTES_LOCAL = 'sessionIdleMinutes';

let registered = false;
/** Registers the session resolver with the access layer (once per process). */
export function registerSessionResolver(): void {
  if (registered) return;
  registered = true;
  addPrincipalResolver(async (req) => {
    const token = cookieToken(req);
    if (!token) return null;
    const found = await resolveSession(token, Number(req.app.locals[IDLE_MINUTES_LOCAL] ?? 30));
    if (!found) return null;
    if (UNSAFE.has(req.method) && req.headers[CONSOLE_HEADER] !== '1') {
      throw new ForbiddenProblem('A console request that changes something must carry the header X-Lotproof-Console: 1 (protection against cross-site requests).');
    }
    return found.principal;
  });
}
