// Invitations and password resets: one-time links sent by e-mail. The token travels only in the
// e-mail; the database keeps its SHA-256 hash, an expiry, and whether it was used.
import { Op, type Transaction } from 'sequelize';
import { Organisation } from './organisation-model';
import { Invitation, PasswordReset, User } from './models';
import { Conflict, NotFound, Refused, Unavailable } from '../core/errors';
import { recordAudit, type Actor } from './audit-trail';
import { sendMail } from '../core/mailer';
import type { RateLimits } from '../metering/rate-limits';
import { primaryRole, sortedRoles, type Principal, type Role } from '../core/principal';
import { hashPassword, hashToken, newToken, TOKEN_PATTERN } from './credentials';
import { revokeUserSessions } from './sessions';
import { checkPassword, chosenRoles, createUser, normaliseEmail, userView, type RoleChoice, type UserView } from './users';

export interface InvitationView {
  id: string;
  email: string;
  /** The first of `roles`, for clients written when a user had one role. */
  role: Role;
  roles: Role[];
  status: 'pending' | 'accepted' | 'revoked' | 'expired';
  createdAt: string;
  expiresAt: string;
  acceptedAt: string | null;
}

function statusOf(inv: Invitation, now = new Date()): InvitationView['status'] {
  if (inv.acceptedAt) return 'accepted';
  if (inv.revokedAt) return 'revoked';
  if (inv.expiresAt.getTime() <= now.getTime()) return 'expired';
  return 'pending';
}

function invitationView(inv: Invitation): InvitationView {
  return {
    id: inv.id,
    email: inv.email,
    role: primaryRole(inv.roles),
    roles: sortedRoles(inv.roles),
    status: statusOf(inv),
    createdAt: inv.createdAt.toISOString(),
    expiresAt: inv.expiresAt.toISOString(),
    acceptedAt: inv.acceptedAt?.toISOString() ?? null,
  };
}

/** The roles as the console names them, for the invitation e-mail ("Quality engineer and Auditor"). */
const ROLE_WORDS: Record<Role, string> = { admin: 'Admin', quality: 'Quality engineer', auditor: 'Auditor' };
function rolesInWords(roles: readonly string[]): string {
  const words = sortedRoles(roles).map((r) => ROLE_WORDS[r]);
  return words.length > 1 ? `${words.slice(0, -1).join(', ')} and ${words[words.length - 1]}` : (words[0] ?? '');
}

async function deliver(to: string, subject: string, text: string): Promise<void> {
  try {
    await sendMail({ to, subject, text });
  } catch {
    throw new Unavailable('The e-mail could not be sent (the mail server did not accept it); nothing was changed. Try again later.');
  }
}

export interface LinkOptions {
  publicUrl: string;
  ttlHours: number;
}

/** Records an invitation and returns its one-time accept link; sends nothing. */
export async function issueInvitation(
  actor: Actor & { organisationId: string; userId?: string | null },
  input: { email: string } & RoleChoice,
  opts: LinkOptions,
): Promise<{ invitation: Invitation; link: string }> {
  const { organisationId } = actor;
  const roles = chosenRoles(input);
  const email = normaliseEmail(input.email);
  // Only an account in this organisation is named here (its admins list its users anyway). An
  // account in another organisation is none of this one's business: the invitation goes out as
  // any other, and acceptance refuses it (one account per address).
  if (await User.findOne({ where: { email, organisationId, removedAt: null } })) {
    throw new Conflict(`${email} has an account in this organisation already.`, 'account-exists');
  }
  const token = newToken();
  const now = new Date();
  const invitation = await Invitation.sequelize!.transaction(async (transaction) => {
    // a newer invitation to the same address replaces a pending one
    await Invitation.update({ revokedAt: now }, { where: { organisationId, email, acceptedAt: null, revokedAt: null }, transaction });
    return Invitation.create(
      {
        organisationId,
        email,
        roles,
        tokenHash: hashToken(token),
        invitedBy: actor.userId ?? null,
        expiresAt: new Date(now.getTime() + opts.ttlHours * 3600_000),
      },
      { transaction },
    );
  });
  return { invitation, link: `${opts.publicUrl}/accept-invite?token=${token}` };
}

/** Invites someone by e-mail: records the invitation and sends the accept link. */
export async function createInvitation(
  actor: Actor & { principal: Principal },
  input: { email: string } & RoleChoice,
  opts: LinkOptions,
): Promise<InvitationView> {
  const organisationId = actor.principal.organisationId;
  const org = await Organisation.findByPk(organisationId);
  const { invitation: inv, link } = await issueInvitation({ ...actor, organisationId, userId: actor.principal.userId }, input, opts);
  try {
    await deliver(
      inv.email,
      `You are invited to ${org?.name ?? 'an organisation'} on Lotproof`,
      [
        `You have been invited to join ${org?.name ?? 'an organisation'} on Lotproof as ${rolesInWords(inv.roles)}.`,
        '',
        'Open this link to choose your password and activate your account:',
        link,
        '',
        `The link works once and expires at ${inv.expiresAt.toISOString()}.`,
        'If you did not expect this invitation, ignore this message.',
      ].join('\n'),
    );
  } catch (err) {
    await inv.destroy();
    throw err;
  }
  await recordAudit(organisationId, actor, 'user.invited', { kind: 'invitation', id: inv.id }, { email: inv.email, roles: sortedRoles(inv.roles) });
  return invitationView(inv);
}

export async function listInvitations(organisationId: string): Promise<InvitationView[]> {
  const rows = await Invitation.findAll({ where: { organisationId }, order: [['createdAt', 'DESC']], limit: 500 });
  return rows.map(invitationView);
}

export async function revokeInvitation(actor: Actor & { principal: Principal }, invitationId: string): Promise<InvitationView> {
  const organisationId = actor.principal.organisationId;
  const inv = await Invitation.findOne({ where: { id: invitationId, organisationId } });
  if (!inv) throw new NotFound(`No invitation ${invitationId} in this organisation.`);
  if (statusOf(inv) === 'pending') {
    await inv.update({ revokedAt: new Date() });
    await recordAudit(organisationId, actor, 'invitation.revoked', { kind: 'invitation', id: inv.id }, { email: inv.email });
  }
  return invitationView(inv);
}

async function pendingInvitation(token: string): Promise<Invitation> {
  const inv = TOKEN_PATTERN.test(token)
    ? await Invitation.findOne({ where: { tokenHash: hashToken(token), acceptedAt: null, revokedAt: null, expiresAt: { [Op.gt]: new Date() } } })
    : null;
  if (!inv) throw new Refused('invalid-token', 'This invitation link is not valid: it was used, revoked, or has expired. Ask an admin for a new one.');
  await assertInviterMayInvite(inv);
  return inv;
}

/** An invitation stands only while whoever sent it is an active admin of its organisation (the operator CLI's have no inviter). */
async function assertInviterMayInvite(inv: Invitation, transaction?: Transaction): Promise<void> {
  if (!inv.invitedBy) return;
  const inviter = await User.findOne({
    where: { id: inv.invitedBy, organisationId: inv.organisationId, removedAt: null },
    ...(transaction ? { lock: transaction.LOCK.SHARE, transaction } : {}),
  });
  if (!inviter?.roles.includes('admin')) {
    throw new Refused('invalid-token', 'This invitation link is no longer valid: whoever sent it may no longer invite. Ask an admin for a new one.');
  }
}

/** What an invitation link offers, for the accept page. */
export async function inspectInvitation(token: string): Promise<{ email: string; role: Role; roles: Role[]; organisation: { name: string }; expiresAt: string }> {
  const inv = await pendingInvitation(token);
  const org = await Organisation.findByPk(inv.organisationId);
  return { email: inv.email, role: primaryRole(inv.roles), roles: sortedRoles(inv.roles), organisation: { name: org?.name ?? '' }, expiresAt: inv.expiresAt.toISOString() };
}

/**
 * Accepts an invitation: one transaction that holds the inviter (FOR SHARE: not removed or demoted
 * meanwhile) and then the invitation (FOR UPDATE), in the order removal and demotion take them
 * (users.ts), and creates the account. The inviter must still be an active admin of the
 * organisation: an invitation of someone who may no longer invite is void, whether or not it was
 * revoked when they lost the right.
 */
export async function acceptInvitation(input: { token: string; password: string; name?: string; ip: string | null }): Promise<UserView> {
  checkPassword(input.password);
  const found = await pendingInvitation(input.token);
  const passwordHash = await hashPassword(input.password);
  return Invitation.sequelize!.transaction(async (transaction) => {
    await assertInviterMayInvite(found, transaction);
    const inv = await Invitation.findOne({
      where: { id: found.id, acceptedAt: null, revokedAt: null, expiresAt: { [Op.gt]: new Date() } },
      lock: transaction.LOCK.UPDATE,
      transaction,
    });
    if (!inv) throw new Refused('invalid-token', 'This invitation link is not valid: it was used, revoked, or has expired. Ask an admin for a new one.');
    const user = await createUser(
      { organisationId: inv.organisationId, email: inv.email, name: input.name, roles: inv.roles, password: input.password },
      { transaction, passwordHash },
    );
    await inv.update({ acceptedAt: new Date(), acceptedUserId: user.id }, { transaction });
    await recordAudit(inv.organisationId, { kind: 'anonymous', label: user.email, ip: input.ip }, 'invitation.accepted', { kind: 'user', id: user.id }, { roles: sortedRoles(user.roles) }, transaction);
    return userView(user);
  });
}

export interface PasswordResetOptions {
  publicUrl: string;
  ttlMinutes: number;
  limits: Pick<RateLimits, 'allowPasswordResetMail'>;
  /** Hears what went wrong with the work behind a request (the caller has had its answer already). */
  onError: (err: unknown) => void;
}

/**
 * Asks for a reset link; says nothing, by its answer or by its timing, about whether the address
 * has an account. The caller answers at once: the lookup, the token, the mail and the audit run
 * afterwards, on the next turn of the event loop, and their failures go to `opts.onError` (a reset
 * whose mail could not be sent is removed). Before, the answer waited for them — 118–280 ms for an
 * address with an account against 7–10 ms without one.
 */
export function requestPasswordReset(input: { email: string; ip: string | null }, opts: PasswordResetOptions): void {
  const email = normaliseEmail(input.email);
  setImmediate(() => {
    sendPasswordReset(email, input.ip, opts).catch((err: unknown) => {
      try {
        opts.onError(err);
      } catch {
        // a failing error reporter must not become an unhandled rejection
      }
    });
  });
}

async function sendPasswordReset(email: string, ip: string | null, opts: PasswordResetOptions): Promise<void> {
  const user = await User.findOne({ where: { email, removedAt: null } });
  if (!user) return;
  if (!(await opts.limits.allowPasswordResetMail(email))) return;
  const token = newToken();
  const reset = await PasswordReset.create({ userId: user.id, tokenHash: hashToken(token), expiresAt: new Date(Date.now() + opts.ttlMinutes * 60_000) });
  try {
    await deliver(
      email,
      'Reset your Lotproof password',
      [
        'Someone asked to reset the password of your Lotproof account. If that was you, open this link:',
        `${opts.publicUrl}/reset-password?token=${token}`,
        '',
        `The link works once and expires in ${opts.ttlMinutes} minutes. If you did not ask, ignore this message; your password stays as it is.`,
      ].join('\n'),
    );
  } catch (err) {
    await reset.destroy();
    throw err;
  }
  await recordAudit(user.organisationId, { kind: 'anonymous', label: email, ip }, 'user.password-reset-requested', { kind: 'user', id: user.id });
}

/** Sets a new password from a reset link and ends every session of the account. */
export async function completePasswordReset(input: { token: string; password: string; ip: string | null }): Promise<void> {
  checkPassword(input.password);
  const reset = TOKEN_PATTERN.test(input.token)
    ? await PasswordReset.findOne({ where: { tokenHash: hashToken(input.token), usedAt: null, expiresAt: { [Op.gt]: new Date() } } })
    : null;
  const user = reset ? await User.findOne({ where: { id: reset.userId, removedAt: null } }) : null;
  if (!reset || !user) throw new Refused('invalid-token', 'This reset link is not valid: it was used or has expired. Ask for a new one.');
  const [claimed] = await PasswordReset.update({ usedAt: new Date() }, { where: { id: reset.id, usedAt: null } });
  if (claimed === 0) throw new Refused('invalid-token', 'This reset link was used already.');
  await user.update({ passwordHash: await hashPassword(input.password) });
  await PasswordReset.update({ usedAt: new Date() }, { where: { userId: user.id, usedAt: null } });
  await revokeUserSessions(user.id);
  await recordAudit(user.organisationId, { kind: 'anonymous', label: user.email, ip: input.ip }, 'user.password-reset', { kind: 'user', id: user.id });
}
