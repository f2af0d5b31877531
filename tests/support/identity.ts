// Test support for identity: users with sessions, and the local SMTP fake.
import { randomUUID } from 'node:crypto';
import { User } from '../../server/models';
import { startSmtpFake, type RunningSmtpFake } from '../../server/platform/smtp-fake';
import type { Role } from '../../server/core/principal';
import { startSession } from '../../server/identity/sessions';
import { createUser } from '../../server/identity/users';

export const TEST_PASSWORD = 'a perfectly long test passphrase';

export async function createTestUser(organisationId: string, role: Role, password = TEST_PASSWORD): Promise<User> {
  return createUser({ organisationId, email: `${role}-${randomUUID().slice(0, 12)}@packer.example`, role, password, name: `Test ${role}` });
}

/** A session cookie header value for a user, without going through sign-in. */
export async function sessionCookieFor(user: User, ttlHours = 1): Promise<string> {
  const { token } = await startSession(user, ttlHours);
  return `lotproof_session=${token}`;
}

export async function startTestSmtp(): Promise<RunningSmtpFake> {
  return startSmtpFake({ host: '127.0.0.1', port: 0 });
}

/** The first link in a text that points at the given console path, e.g. "/accept-invite". */
export function linkIn(text: string, path: string): URL {
  const m = new RegExp(`https?://\\S+${path.replace(/[/]/g, '\\/')}\\?token=[A-Za-z0-9_-]+`).exec(text);
  if (!m) throw new Error(`no ${path} link in: ${text}`);
  return new URL(m[0]);
}
