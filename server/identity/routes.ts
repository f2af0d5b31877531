// Identity handlers: sessions, users, invitations, password resets, API keys, the audit trail,
// and the development mailbox. Thin: read the validated request, call one service, shape the reply.
import type { Request } from 'express';
import type { AppContext, Handlers } from '../http/context';
import { NotFoundProblem } from '../http/problem';
import { clearSessionCookie, setSessionCookie } from './session-cookie.http';
import { listensOnLoopbackOnly, mailboxRefusal } from './dev-mailbox.http';
import { DEVELOPMENT_MODE_HOW } from '../config';
import { Failure } from '../core/errors';
import type { Actor } from './audit-trail';
import { listAudit } from './audit-trail';
import {
  acceptInvitation,
  completePasswordReset,
  createInvitation,
  inspectInvitation,
  listInvitations,
  requestPasswordReset,
  revokeInvitation,
} from './invitations';
import { idempotent } from '../core/idempotency';
import { idempotencyClaim, pageOf, sendStored } from '../http/replies';
import { createKey, getKey, listKeys, revokeKey } from './api-keys';
import { configureMailer, readDevMailbox } from '../core/mailer';
import type { Principal, Scope } from '../core/principal';
import { createRateLimits } from '../metering/rate-limits';
import { describeSession, revokeSession, signIn, signInLimitConfig } from './sessions';
import { changeRoles, listUsers, removeUser } from './users';

function ip(req: Request): string {
  return req.ip ?? 'unknown';
}

function actor(req: Request): Actor & { principal: Principal } {
  return { principal: req.principal!, ip: req.ip ?? null };
}

export function identityHandlers(ctx: AppContext): Handlers {
  const { config } = ctx;
  configureMailer(config.smtp);
  const limits = createRateLimits(ctx.db.sequelize, config.rateLimits);
  const signInLimits = createRateLimits(ctx.db.sequelize, signInLimitConfig(config.rateLimits));
  const links = { publicUrl: config.publicUrl, ttlHours: config.sessions.invitationTtlHours };
  const resets = {
    publicUrl: config.publicUrl,
    ttlMinutes: config.sessions.passwordResetTtlMinutes,
    limits,
    // After the 202: the name of what failed, and our own message; never the address, a token or SQL.
    onError: (err: unknown) =>
      ctx.logger.warn({ failure: err instanceof Error ? err.name : typeof err, detail: err instanceof Failure ? err.message : undefined }, 'password reset: the link could not be sent'),
  };
  if (!config.development) {
    ctx.logger.info(`Development mode is off (production behaviour): no development mailbox, no local SMTP fake, no webhooks to private addresses. For a local trial, ${DEVELOPMENT_MODE_HOW}.`);
  } else if (!listensOnLoopbackOnly(config)) {
    ctx.logger.warn(`Development mode, but listening on ${config.host}, beyond loopback: the development mailbox is off.`);
  }

  return {
    signIn: async (req, res) => {
      const { token, view } = await signIn(
        { email: req.body.email, password: req.body.password, ip: ip(req) },
        { ttlHours: config.sessions.ttlHours, limits: signInLimits },
      );
      setSessionCookie(req, res, token, new Date(view.expiresAt), config.publicUrl);
      res.status(201).json(view);
    },
    getSession: async (req, res) => {
      res.json(await describeSession(req.principal!));
    },
    signOut: async (req, res) => {
      await revokeSession(req.principal!);
      clearSessionCookie(req, res, config.publicUrl);
      res.status(204).end();
    },

    listUsers: async (req, res) => {
      res.json({ items: await listUsers(req.principal!.organisationId) });
    },
    changeUserRole: async (req, res) => {
      res.json(await changeRoles(actor(req), String(req.params.userId), { roles: req.body.roles, role: req.body.role }));
    },
    removeUser: async (req, res) => {
      await removeUser(actor(req), String(req.params.userId));
      res.status(204).end();
    },

    listInvitations: async (req, res) => {
      res.json({ items: await listInvitations(req.principal!.organisationId) });
    },
    createInvitation: async (req, res) => {
      // A retry with the same Idempotency-Key gets the first reply and sends no second e-mail.
      const r = await idempotent(ctx.db.sequelize, idempotencyClaim(req, 'createInvitation'), async () => {
        const v = await createInvitation(actor(req), { email: req.body.email, roles: req.body.roles, role: req.body.role }, links);
        return { status: 201, value: v, resourceId: v.id };
      });
      sendStored(res, r);
    },
    revokeInvitation: async (req, res) => {
      res.json(await revokeInvitation(actor(req), String(req.params.invitationId)));
    },
    inspectInvitation: async (req, res) => {
      res.json(await inspectInvitation(req.body.token));
    },
    acceptInvitation: async (req, res) => {
      res.status(201).json(await acceptInvitation({ token: req.body.token, password: req.body.password, name: req.body.name, ip: ip(req) }));
    },
    requestPasswordReset: async (req, res) => {
      // Answered before anything about the address is looked up (its timing tells nothing).
      requestPasswordReset({ email: req.body.email, ip: ip(req) }, resets);
      res.status(202).end();
    },
    completePasswordReset: async (req, res) => {
      await completePasswordReset({ token: req.body.token, password: req.body.password, ip: ip(req) });
      res.status(204).end();
    },

    listApiKeys: async (req, res) => {
      res.json({ items: await listKeys(req.principal!.organisationId) });
    },
    createApiKey: async (req, res) => {
      const created = await createKey(actor(req), { name: req.body.name, scopes: req.body.scopes as Scope[], expiresAt: req.body.expiresAt });
      res.setHeader('Cache-Control', 'no-store');
      res.status(201).json(created);
    },
    getApiKey: async (req, res) => {
      res.json(await getKey(req.principal!.organisationId, String(req.params.keyId)));
    },
    revokeApiKey: async (req, res) => {
      res.json(await revokeKey(actor(req), String(req.params.keyId)));
    },

    listAuditEvents: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      res.json(
        await listAudit(req.principal!.organisationId, {
          ...pageOf(q),
          action: typeof q.action === 'string' ? q.action : undefined,
        }),
      );
    },

    getDevMailbox: (req, res) => {
      // Every organisation's links: development mode, a server on loopback, a client on loopback.
      const refusal = mailboxRefusal(config, req);
      if (refusal) throw new NotFoundProblem(refusal);
      res.setHeader('Cache-Control', 'no-store');
      res.json({ items: readDevMailbox() });
    },
  };
}
