// Console users of an organisation: listing, role changes, removal, and password rules.
import { Op } from 'sequelize';
import { Session, User } from './models';
import { Conflict, InvalidInput, NotFound } from '../core/errors';
import { recordAudit, type Actor } from './audit-trail';
import { hashPassword } from './credentials';
import type { Role } from '../core/principal';

export const PASSWORD_MIN = 12;
export const PASSWORD_MAX = 200;

export interface UserView {
  id: string;
  email: string;
  name: string;
  role: Role;
  createdAt: string;
}

export function userView(u: User): UserView {
  return { id: u.id, email: u.email, name: u.name, role: u.role as Role, createdAt: u.createdAt.toISOString() };
}

export function normaliseEmail(email: string): string {
  return email.trim().toLowerCase();
}

/** Length rules only (NIST SP 800-63B §5.1.1: length over composition rules). */
export function checkPassword(password: string): void {
  if ([...password].length < PASSWORD_MIN) {
    throw new InvalidInput(`The password must have at least ${PASSWORD_MIN} characters.`, [{ field: '/password', detail: `shorter than ${PASSWORD_MIN} characters` }]);
  }
  if ([...password].length > PASSWORD_MAX) {
    throw new InvalidInput(`The password may have at most ${PASSWORD_MAX} characters.`, [{ field: '/password', detail: `longer than ${PASSWORD_MAX} characters` }]);
  }
}

/** Creates an active user; the e-mail address must not belong to another active account. */
export async function createUser(input: { organisationId: string; email: string; name?: string; role: Role; password: string }): Promise<User> {
  checkPassword(input.password);
  const email = normaliseEmail(input.email);
  if (await User.findOne({ where: { email, removedAt: null } })) {
    throw new Conflict(`An account for ${email} exists already.`, 'account-exists');
  }
  return User.create({
    organisationId: input.organisationId,
    email,
    name: input.name?.trim() ?? '',
    role: input.role,
    passwordHash: await hashPassword(input.password),
  });
}

export async function listUsers(organisationId: string): Promise<UserView[]> {
  const users = await User.findAll({ where: { organisationId, removedAt: null }, order: [['createdAt', 'DESC']] });
  return users.map(userView);
}

async function activeUser(organisationId: string, userId: string): Promise<User> {
  const user = await User.findOne({ where: { id: userId, organisationId, removedAt: null } });
  if (!user) throw new NotFound(`No user ${userId} in this organisation.`);
  return user;
}

async function otherAdmins(organisationId: string, userId: string): Promise<number> {
  return User.count({ where: { organisationId, role: 'admin', removedAt: null, id: { [Op.ne]: userId } } });
}

export async function changeRole(actor: Actor & { principal: { organisationId: string } }, userId: string, role: Role): Promise<UserView> {
  const organisationId = actor.principal.organisationId;
  const user = await activeUser(organisationId, userId);
  if (user.role === role) return userView(user);
  if (user.role === 'admin' && (await otherAdmins(organisationId, user.id)) === 0) {
    throw new Conflict('This is the last admin of the organisation; make another user admin first.', 'last-admin');
  }
  const from = user.role;
  await user.update({ role });
  await recordAudit(organisationId, actor, 'user.role-changed', { kind: 'user', id: user.id }, { email: user.email, from, to: role });
  return userView(user);
}

/** Removes a user and ends every session they have, at once. */
export async function removeUser(actor: Actor & { principal: { organisationId: string; userId?: string } }, userId: string): Promise<void> {
  const organisationId = actor.principal.organisationId;
  const user = await activeUser(organisationId, userId);
  if (user.role === 'admin' && (await otherAdmins(organisationId, user.id)) === 0) {
    throw new Conflict('This is the last admin of the organisation; it cannot be removed.', 'last-admin');
  }
  const now = new Date();
  await User.sequelize!.transaction(async (transaction) => {
    await user.update({ removedAt: now, removedBy: actor.principal.userId ?? null }, { transaction });
    await Session.update({ revokedAt: now }, { where: { userId: user.id, revokedAt: null }, transaction });
  });
  await recordAudit(organisationId, actor, 'user.removed', { kind: 'user', id: user.id }, { email: user.email, role: user.role });
}
