// Console users of an organisation: listing, role changes, removal (with the invitations they sent),
// and password rules. A user holds one or more roles (issue 16); someone must keep admin.
import { Op, UniqueConstraintError, type Transaction } from 'sequelize';
import { Invitation, Session, User } from './models';
import { Conflict, InvalidInput, NotFound } from '../core/errors';
import { recordAudit, type Actor } from './audit-trail';
import { hashPassword } from './credentials';
import { primaryRole, ROLES, sortedRoles, type Role } from '../core/principal';

export const PASSWORD_MIN = 12;
export const PASSWORD_MAX = 200;

export interface UserView {
  id: string;
  email: string;
  name: string;
  /** The first of `roles`, for clients written when a user had one role. */
  role: Role;
  roles: Role[];
  createdAt: string;
}

export function userView(u: User): UserView {
  const roles = sortedRoles(u.roles);
  return { id: u.id, email: u.email, name: u.name, role: primaryRole(roles), roles, createdAt: u.createdAt.toISOString() };
}

/** Roles as a request names them: `roles`, or the older single `role`, never both. */
export interface RoleChoice {
  roles?: readonly string[];
  role?: string;
}

/**
 * The roles a choice names, without repeats and in the order of ROLES; refused, naming the field,
 * when it names none, both forms, a role twice or a role we do not have.
 */
export function chosenRoles(choice: RoleChoice): Role[] {
  if (choice.roles !== undefined && choice.role !== undefined) {
    throw new InvalidInput('Send the roles as `roles` only (`role` is the older form for one role).', [{ field: '/role', detail: 'not together with roles' }]);
  }
  const named = choice.roles ?? (choice.role !== undefined ? [choice.role] : []);
  if (named.length === 0) throw new InvalidInput('Name at least one role.', [{ field: '/roles', detail: 'at least one role' }]);
  const unknown = named.findIndex((r) => !(ROLES as readonly string[]).includes(r));
  if (unknown >= 0) {
    const field = choice.roles ? `/roles/${unknown}` : '/role';
    throw new InvalidInput(`${JSON.stringify(named[unknown])} is not a role; the roles are ${ROLES.join(', ')}.`, [{ field, detail: 'unknown role' }]);
  }
  if (new Set(named).size !== named.length) throw new InvalidInput('A role is named twice.', [{ field: '/roles', detail: 'repeated role' }]);
  return sortedRoles(named);
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
  input: { organisationId: string; email: string; name?: string; password: string } & RoleChoice,
  opts: { transaction?: Transaction; passwordHash?: string } = {},
): Promise<User> {
  checkPassword(input.password);
  const roles = chosenRoles(input);
  const email = normaliseEmail(input.email);
  const taken = () => new Conflict(`An account for ${email} exists already.`, 'account-exists');
  if (await User.findOne({ where: { email, removedAt: null }, transaction: opts.transaction })) throw taken();
  const passwordHash = opts.passwordHash ?? (await hashPassword(input.password));
  try {
    return await User.create(
      { organisationId: input.organisationId, email, name: input.name?.trim() ?? '', roles, passwordHash },
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
  return User.count({ where: { organisationId, roles: { [Op.contains]: ['admin'] }, removedAt: null, id: { [Op.ne]: userId } }, transaction });
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

/**
 * Gives a user these roles (one or more). Taking admin from the last user who holds it is refused,
 * whatever other roles they keep; whoever loses admin loses the invitations they sent.
 */
export async function changeRoles(actor: Actor & { principal: { organisationId: string } }, userId: string, choice: RoleChoice): Promise<UserView> {
  const roles = chosenRoles(choice);
  const organisationId = actor.principal.organisationId;
  return User.sequelize!.transaction(async (transaction) => {
    await lockAdminChanges(organisationId, transaction);
    const user = await activeUser(organisationId, userId, transaction);
    const before = sortedRoles(user.roles);
    if (before.join() === roles.join()) return userView(user);
    const losesAdmin = before.includes('admin') && !roles.includes('admin');
    if (losesAdmin && (await otherAdmins(organisationId, user.id, transaction)) === 0) {
      throw new Conflict('This is the last admin of the organisation; make another user admin first.', 'last-admin');
    }
    await user.update({ roles }, { transaction });
    await recordAudit(organisationId, actor, 'user.role-changed', { kind: 'user', id: user.id }, { email: user.email, changes: [{ field: '/roles', before, after: roles }] }, transaction);
    if (losesAdmin) await revokeInvitationsSentBy(actor, user, 'inviter-demoted', transaction);
    return userView(user);
  });
}

/** Removes a user, ends every session they have and revokes the invitations they sent, at once. */
export async function removeUser(actor: Actor & { principal: { organisationId: string; userId?: string } }, userId: string): Promise<void> {
  const organisationId = actor.principal.organisationId;
  await User.sequelize!.transaction(async (transaction) => {
    await lockAdminChanges(organisationId, transaction);
    const user = await activeUser(organisationId, userId, transaction);
    if (user.roles.includes('admin') && (await otherAdmins(organisationId, user.id, transaction)) === 0) {
      throw new Conflict('This is the last admin of the organisation; it cannot be removed.', 'last-admin');
    }
    const now = new Date();
    await user.update({ removedAt: now, removedBy: actor.principal.userId ?? null }, { transaction });
    await Session.update({ revokedAt: now }, { where: { userId: user.id, revokedAt: null }, transaction });
    await recordAudit(organisationId, actor, 'user.removed', { kind: 'user', id: user.id }, { email: user.email, roles: sortedRoles(user.roles) }, transaction);
    await revokeInvitationsSentBy(actor, user, 'inviter-removed', transaction);
  });
}
