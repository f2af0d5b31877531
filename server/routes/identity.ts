// Identity handlers: sessions, users, invitations, password resets, API keys, usage, audit trail,
// and the development mailbox. Thin: read the validated request, call one service, shape the reply.
import type { Request } from 'express';
import type { AppContext, Handlers } from '../http/context';
import { NotFoundProblem, ValidationProblem } from '../http/problem';
import { clearSessionCookie, setSessionCookie } from '../http/session-auth';
import type { Actor } from '../services/audit-trail';
import { listAudit } from '../services/audit-trail';
import {
  acceptInvitation,
  completePasswordReset,
  createInvitation,
  inspectInvitation,
  listInvitations,
  requestPasswordReset,
  revokeInvitation,
} from '../services/invitations';
import { idempotent } from '../services/idempotency';
import { idemKey, sendStored } from '../http/replies';
import { createKey, getKey, listKeys, revokeKey } from '../services/key-management';
import { configureMailer, readDevMailbox } from '../services/mailer';
import type { Principal, Role, Scope } from '../services/principal';
import { createRateLimits } from '../services/rate-limits';
import { describeSession, revokeSession, signIn } from '../services/sessions';
import { readUsage, utcDay } from '../services/usage';
import { changeRole, listUsers, removeUser } from '../services/users';

const MAX_USAGE_DAYS = 366;

function ip(req: Request): string {
  return req.ip ?? 'unknown';
}

function actor(req: Request): Actor & { principal: Principal } {
  return { principal: req.principal!, ip: req.ip ?? null };
}

function usageRange(query: Record<string, unknown>): { from: string; to: string } {
  const to = typeof query.to === 'string' ? query.to : utcDay(new Date());
  const from = typeof query.from === 'string' ? query.from : utcDay(new Date(Date.parse(`${to}T00:00:00Z`) - 30 * 86_400_000));
  const span = (Date.parse(`${to}T00:00:00Z`) - Date.parse(`${from}T00:00:00Z`)) / 86_400_000;
  if (span < 0) throw new ValidationProblem('from must not be after to.', [{ pointer: '/query/from', detail: 'after to' }]);
  if (span >= MAX_USAGE_DAYS) throw new ValidationProblem(`At most ${MAX_USAGE_DAYS} days at once.`, [{ pointer: '/query/from', detail: 'range too long' }]);
  return { from, to };
}

export function identityHandlers(ctx: AppContext): Handlers {
  const { config } = ctx;
  configureMailer(config.smtp);
  const limits = createRateLimits(ctx.db.sequelize, config.rateLimits);
  const links = { publicUrl: config.publicUrl, ttlHours: config.sessions.invitationTtlHours };

  return {
    signIn: async (req, res) => {
      const { token, view } = await signIn(
        { email: req.body.email, password: req.body.password, ip: ip(req) },
        { ttlHours: config.sessions.ttlHours, limits },
      );
      setSessionCookie(res, token, new Date(view.expiresAt), config.publicUrl);
      res.status(201).json(view);
    },
    getSession: async (req, res) => {
      res.json(await describeSession(req.principal!));
    },
    signOut: async (req, res) => {
      await revokeSession(req.principal!);
      clearSessionCookie(res, config.publicUrl);
      res.status(204).end();
    },

    listUsers: async (req, res) => {
      res.json({ items: await listUsers(req.principal!.organisationId) });
    },
    changeUserRole: async (req, res) => {
      res.json(await changeRole(actor(req), String(req.params.userId), req.body.role as Role));
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
      const r = await idempotent(ctx.db.sequelize, req.principal!.organisationId, 'createInvitation', idemKey(req), req.body, async () => {
        const v = await createInvitation(actor(req), { email: req.body.email, role: req.body.role as Role }, links);
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
      await requestPasswordReset({ email: req.body.email, ip: ip(req) }, { publicUrl: config.publicUrl, ttlMinutes: config.sessions.passwordResetTtlMinutes, limits });
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

    getUsage: async (req, res) => {
      const range = usageRange(req.query as Record<string, unknown>);
      const keyId = typeof req.query.keyId === 'string' ? req.query.keyId : undefined;
      res.json(await readUsage(req.principal!.organisationId, { ...range, keyId }));
    },
    listAuditEvents: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      res.json(
        await listAudit(req.principal!.organisationId, {
          limit: Number(q.limit ?? 50),
          cursor: typeof q.cursor === 'string' ? q.cursor : undefined,
          action: typeof q.action === 'string' ? q.action : undefined,
        }),
      );
    },

    getDevMailbox: (_req, res) => {
      if (!config.development) throw new NotFoundProblem('No route for GET /v1/dev/mailbox. The API lives under /v1; see /docs.');
      res.setHeader('Cache-Control', 'no-store');
      res.json({ items: readDevMailbox() });
    },
  };
}
