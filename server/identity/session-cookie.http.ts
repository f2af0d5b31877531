// Console sessions over HTTP: the session cookie (HttpOnly, SameSite=Strict) and its resolver.
// Over https — the public URL is https, or the request arrived over TLS (directly or through a
// trusted proxy's X-Forwarded-Proto) — it is `__Host-lotproof_session`, Secure, Path=/, no Domain:
// the browser keeps it only so, and a cookie planted by a sibling domain or over plain http cannot
// take its place (over TLS only the prefixed cookie is read). Over plain http it is
// `lotproof_session` without Secure: a browser refuses a Secure cookie from an http origin other
// than loopback (Chromium takes it on http://127.0.0.1 and localhost, other browsers not all), and
// there the session travels in clear anyway. CSRF: a session-authenticated unsafe request (POST, PUT, PATCH, DELETE)
// must carry `X-Lotproof-Console: 1` — a cross-site page cannot add a custom header without a CORS
// preflight, and this server answers no CORS preflight.
import type { Request, Response } from 'express';
import { resolveSession } from './sessions';
import { addPrincipalResolver } from '../http/access';
import { ForbiddenProblem } from '../http/problem';

export const SESSION_COOKIE = 'lotproof_session';
/** The name over https; the prefix binds it to Secure, Path=/ and this host alone. */
export const SECURE_SESSION_COOKIE = '__Host-lotproof_session';
export const CONSOLE_HEADER = 'x-lotproof-console';
const UNSAFE = new Set(['POST', 'PUT', 'PATCH', 'DELETE']);

function overHttps(req: Request, publicUrl: string): boolean {
  return req.secure || publicUrl.startsWith('https:');
}

function cookieToken(req: Request): string | null {
  const cookies = (req as Request & { cookies?: Record<string, unknown> }).cookies ?? {};
  const pick = (name: string) => {
    const value = cookies[name];
    return typeof value === 'string' && value.length > 0 ? value : null;
  };
  // Over TLS only the prefixed cookie counts; over plain http it is preferred when the browser has it.
  return pick(SECURE_SESSION_COOKIE) ?? (req.secure ? null : pick(SESSION_COOKIE));
}

export function setSessionCookie(req: Request, res: Response, token: string, expiresAt: Date, publicUrl: string): void {
  const secure = overHttps(req, publicUrl);
  res.cookie(secure ? SECURE_SESSION_COOKIE : SESSION_COOKIE, token, { httpOnly: true, sameSite: 'strict', secure, path: '/', expires: expiresAt });
  // An unprefixed cookie left over (or planted) beside the prefixed one goes.
  if (secure) res.clearCookie(SESSION_COOKIE, { httpOnly: true, sameSite: 'strict', path: '/' });
}

export function clearSessionCookie(req: Request, res: Response, publicUrl: string): void {
  res.clearCookie(SECURE_SESSION_COOKIE, { httpOnly: true, sameSite: 'strict', secure: true, path: '/' });
  res.clearCookie(SESSION_COOKIE, { httpOnly: true, sameSite: 'strict', secure: overHttps(req, publicUrl), path: '/' });
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
