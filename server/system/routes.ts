// Health, readiness, and the caller's own identity.
import type { AppContext, Handlers } from '../http/context';
import { Organisation } from '../identity/organisation-model';
import { User } from '../identity/models';
import { NotFoundProblem } from '../http/problem';
import { primaryRole } from '../core/principal';

export function systemHandlers(ctx: AppContext): Handlers {
  return {
    getHealth: (_req, res) => {
      res.json({ status: 'ok' });
    },
    getReadiness: async (_req, res) => {
      try {
        await ctx.db.ping();
        res.json({ status: 'ok' });
      } catch {
        res.status(503).type('application/problem+json').send(
          JSON.stringify({
            type: 'https://lotproof.dev/problems/unavailable',
            title: 'Service unavailable',
            status: 503,
            detail: 'The database is not reachable.',
          }),
        );
      }
    },
    getCaller: async (req, res) => {
      const p = req.principal!;
      const org = await Organisation.findByPk(p.organisationId);
      if (!org) throw new NotFoundProblem('The organisation of this credential no longer exists.');
      // A session's user, scoped by the organisation like every other read (an API key has none).
      const user = p.userId ? await User.findOne({ where: { id: p.userId, organisationId: p.organisationId }, attributes: ['email'] }) : null;
      res.json({
        organisation: { id: org.id, name: org.name, demo: org.demo },
        kind: p.kind,
        scopes: p.scopes,
        // `roles` of a session, and its first as `role` for clients written when a user had one role
        ...(p.roles?.length ? { role: primaryRole(p.roles), roles: p.roles } : {}),
        ...(p.keyId ? { keyId: p.keyId } : {}),
        ...(p.userId ? { userId: p.userId } : {}),
        ...(user ? { email: user.email } : {}),
      });
    },
  };
}
