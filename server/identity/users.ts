// Console users of an organisation: listing, role changes, removal (with the invitations they sent),
// and password rules.
import { Op, UniqueConstraintError, type Transaction } from 'sequelize';
import { Invitation, Session, User } from './models';
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

/**
 * Creates an active user; the e-mail address must not belong to another active account.
 * `passwordHash`: the password hashed already (so a caller can hash before it takes locks).
 */
export async function createUser(
  input: { organisationId: string; email: string; name?: string; role: Role; password: string },
  opts: { transaction?: Transaction; passwordHash?: string } = {},
): Promise<User> {
  checkPassword(input.password);
  const email = normaliseEmail(input.email);
  const taken = () => new Conflict(`An account for ${email} exists already.`, 'account-exists');
  if (await User.findOne({ where: { email, removedAt: null }, transaction: opts.transaction })) throw taken();
  const passwordHash = opts.passwordHash ?? (await hashPassword(input.password));
  try {
    return await User.create(
      { organisationId: input.organisationId, email, name: input.name?.trim() ?? '', role: input.role, passwordHash },
      { transaction: opts.transaction },
    );
  } catch (err) {
    // the same address taken at the same moment by another sign-up
    if (err instanceof UniqueConstraintError) throw taken();
    throw err;
  }
}

export async function listUsers(organisationId: string): Promise<UserView[]> {
  const users = await User.findAll({ where: { organisationId, removedAt: null }, order: [['createdAt', 'DESC']] });
  return users.map(userView);
}

async function activeUser(organisationId: string, userId: string, transaction: Transaction): Promise<User> {
  const user = await User.findOne({ where: { id: userId, organisationId, removedAt: null }, transaction });
  if (!user) throw new NotFound(`No user ${userId} in this organisation.`);
  return user;
}

async function otherAdmins(organisationId: string, userId: string, transaction: Transaction): Promise<number> {
  return User.count({ where: { organisationId, role: 'admin', removedAt: null, id: { [Op.ne]: userId } }, transaction });
}

/**
 * Role changes and removals of one organisation, one at a time: each takes this transaction-scoped
 * advisory lock before it reads anything, so the last-admin check and the change it guards are one
 * step (two admins demoting or removing each other at once can no longer both pass the check). An
 * advisory lock rather than a row lock on the organisation: inserting a user takes a key-share lock
 * on that row (its foreign key), which must not wait behind this.
 */
async function lockAdminChanges(organisationId: string, transaction: Transaction): Promise<void> {
  await User.sequelize!.query('SELECT pg_advisory_xact_lock(hashtextextended($1, 0))', { bind: [`lotproof:admin-changes:${organisationId}`], transaction });
}

/**
 * Revokes the pending invitations a user sent (they were removed, or lost the admin role), each in
 * the audit trail. Acceptance checks the inviter too (invitations.ts), for invitations left pending
 * before this rule.
 */
async function revokeInvitationsSentBy(
  actor: Actor,
  user: User,
  reason: 'inviter-removed' | 'inviter-demoted',
  transaction: Transaction,
): Promise<void> {
  const now = new Date();
  const pending = await Invitation.findAll({
    where: { organisationId: user.organisationId, invitedBy: user.id, acceptedAt: null, revokedAt: null, expiresAt: { [Op.gt]: now } },
    lock: transaction.LOCK.UPDATE,
    transaction,
  });
  for (const inv of pending) {
    await inv.update({ revokedAt: now }, { transaction });
    await recordAudit(user.organisationId, actor, 'invitation.revoked', { kind: 'invitation', id: inv.id }, { email: inv.email, reason, inviterId: user.id }, transaction);
  }
}

export async function changeRole(actor: Actor & { principal: { organisationId: string } }, userId: string, role: Role): Promise<UserView> {
  const organisationId = actor.principal.organisationId;
  return User.sequelize!.transaction(async (transaction) => {
    await lockAdminChanges(organisationId, transaction);
    const user = await activeUser(organisationId, userId, transaction);
    if (user.role === role) return userView(user);
    if (user.role === 'admin' && (await otherAdmins(organisationId, user.id, transaction)) === 0) {
      throw new Conflict('This is the last admin of the organisation; make another user admin first.', 'last-admin');
    }
    const from = user.role;
    await user.update({ role }, { transaction });
    await recordAudit(organisationId, actor, 'user.role-changed', { kind: 'user', id: user.id }, { email: user.email, from, to: role }, transaction);
    if (from === 'admin') await revokeInvitationsSentBy(actor, user, 'inviter-demoted', transaction);
    return userView(user);
  });
}

/** Removes a user, ends every session they have and revokes the invitations they sent, at once. */
export async function removeUser(actor: Actor & { principal: { organisationId: string; userId?: string } }, userId: string): Promise<void> {
  const organisationId = actor.principal.organisationId;
  await User.sequelize!.transaction(async (transaction) => {
    await lockAdminChanges(organisationId, transaction);
    const user = await activeUser(organisationId, userId, transaction);
    if (user.role === 'admin' && (await otherAdmins(organisationId, user.id, transaction)) === 0) {
      throw new Conflict('This is the last admin of the organisation; it cannot be removed.', 'last-admin');
    }
    const now = new Date();
    await user.update({ removedAt: now, removedBy: actor.principal.userId ?? null }, { transaction });
    await Session.update({ revokedAt: now }, { where: { userId: user.id, revokedAt: null }, transaction });
    await recordAudit(organisationId, actor, 'user.removed', { kind: 'user', id: user.id }, { email: user.email, role: user.role }, transaction);
    await revokeInvitationsSentBy(actor, user, 'inviter-removed', transaction);
  });
}
