// Console sessions: sign-in with e-mail and password, an opaque random token kept by the browser in
// an HttpOnly cookie and stored here only as a SHA-256 hash; sessions expire and can be revoked.
import { Op } from 'sequelize';
import { Organisation } from './organisation-model';
import { Session, User } from './models';
import { NotAuthenticated } from '../core/errors';
import { recordAudit } from './audit-trail';
import type { RateLimits } from '../metering/rate-limits';
import type { RateLimitConfig } from '../config';
import { burnPasswordCheck, hashToken, newToken, TOKEN_PATTERN, verifyPassword } from './credentials';
import { normaliseEmail, userView, type UserView } from './users';
import { sortedRoles, type Principal } from '../core/principal';

export interface SessionView {
  user: UserView;
  organisation: { id: string; name: string; demo: boolean };
  expiresAt: string;
}

export interface StartedSession {
  /** The cookie value; given to the browser once, never stored. */
  token: string;
  view: SessionView;
}

async function viewOf(user: User, session: Session): Promise<SessionView> {
  const org = await Organisation.findByPk(user.organisationId);
  return {
    user: userView(user),
    organisation: { id: user.organisationId, name: org?.name ?? '', demo: org?.demo ?? false },
    expiresAt: session.expiresAt.toISOString(),
  };
}

/** Starts a session for a user without a password check (sign-in, tests, demo). */
export async function startSession(user: User, ttlHours: number, ip: string | null = null): Promise<StartedSession> {
  const token = newToken();
  const session = await Session.create({
    organisationId: user.organisationId,
    userId: user.id,
    tokenHash: hashToken(token),
    expiresAt: new Date(Date.now() + ttlHours * 3600_000),
    ip,
  });
  return { token, view: await viewOf(user, session) };
}

const WRONG = 'The e-mail address or the password is not right.';

/**
 * The limits signIn must be given (`createRateLimits(sequelize, signInLimitConfig(cfg))`): signIn
 * counts each attempt before it checks the password, so the attempt being made is already on the
 * counter when it asks whether it may go on, and "N failures allowed" is a counter that refuses at
 * N + 1.
 */
export function signInLimitConfig(cfg: RateLimitConfig): RateLimitConfig {
  return { ...cfg, signInFailuresPerAccount: cfg.signInFailuresPerAccount + 1, signInFailuresPerIp: cfg.signInFailuresPerIp + 1 };
}

/**
 * Signs in with e-mail and password. The failure counters are shared by every process (in
 * PostgreSQL), and an attempt is counted before its password is checked, with one atomic increment
 * per counter: of any number of concurrent attempts at one account, at most the configured number
 * get a password check in a window (the rest are refused with 429 before the check), where reading
 * the counter first and counting after a failed check let all of them through. A success clears
 * the account's counter; on the per-IP counter it stays counted (RateLimits offers no refund).
 * `opts.limits` is built from signInLimitConfig.
 */
export async function signIn(
  input: { email: string; password: string; ip: string },
  opts: { ttlHours: number; limits: RateLimits },
): Promise<StartedSession> {
  const email = normaliseEmail(input.email);
  // Refused at once, and nothing counted, while the account or address is locked already.
  await opts.limits.assertSignInAllowed(email, input.ip);
  await opts.limits.signInFailed(email, input.ip);
  // Now with this attempt, and every other one in flight, on the counters.
  await opts.limits.assertSignInAllowed(email, input.ip);
  const user = await User.findOne({ where: { email, removedAt: null } });
  const ok = user ? await verifyPassword(input.password, user.passwordHash) : (await burnPasswordCheck(input.password), false);
  if (!user || !ok) {
    if (user) {
      await recordAudit(user.organisationId, { kind: 'anonymous', label: email, ip: input.ip }, 'user.sign-in-failed', { kind: 'user', id: user.id }, { email });
    }
    throw new NotAuthenticated(WRONG);
  }
  await opts.limits.signInSucceeded(email);
  const started = await startSession(user, opts.ttlHours, input.ip);
  await recordAudit(user.organisationId, { principal: { organisationId: user.organisationId, kind: 'session', scopes: [], userId: user.id }, ip: input.ip }, 'user.signed-in', { kind: 'user', id: user.id });
  return started;
}

export interface ResolvedSession {
  principal: Principal;
  view: SessionView;
}

/** last_seen_at is written at most this often per session (not on every request). */
const SEEN_RESOLUTION_MS = 60_000;

/**
 * The live session for a cookie value, or null when it is unknown, expired, idle for longer than
 * idleMinutes, revoked, or its user removed. A live session is marked as seen now.
 */
export async function resolveSession(token: string, idleMinutes: number, now = new Date()): Promise<ResolvedSession | null> {
  if (!TOKEN_PATTERN.test(token)) return null;
  const session = await Session.findOne({
    where: { tokenHash: hashToken(token), revokedAt: null, expiresAt: { [Op.gt]: now }, lastSeenAt: { [Op.gt]: new Date(now.getTime() - idleMinutes * 60_000) } },
  });
  if (!session) return null;
  const user = await User.findOne({ where: { id: session.userId, removedAt: null } });
  if (!user) return null;
  if (now.getTime() - session.lastSeenAt.getTime() >= SEEN_RESOLUTION_MS) {
    await Session.update({ lastSeenAt: now }, { where: { id: session.id, lastSeenAt: { [Op.lt]: now } } });
  }
  return {
    principal: { organisationId: user.organisationId, kind: 'session', scopes: [], roles: sortedRoles(user.roles), userId: user.id, sessionId: session.id },
    view: await viewOf(user, session),
  };
}

export async function describeSession(principal: Principal): Promise<SessionView> {
  const session = await Session.findOne({ where: { id: principal.sessionId ?? null, organisationId: principal.organisationId } });
  const user = session ? await User.findOne({ where: { id: session.userId, removedAt: null } }) : null;
  if (!session || !user) throw new NotAuthenticated('The session has ended; sign in again.');
  return viewOf(user, session);
}

export async function revokeSession(principal: Principal): Promise<void> {
  if (!principal.sessionId) return;
  await Session.update({ revokedAt: new Date() }, { where: { id: principal.sessionId, organisationId: principal.organisationId, revokedAt: null } });
}

export async function revokeUserSessions(userId: string): Promise<void> {
  await Session.update({ revokedAt: new Date() }, { where: { userId, revokedAt: null } });
}
