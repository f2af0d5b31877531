// Per-request rate limits and usage counting, after authentication: RateLimit-Limit,
// RateLimit-Remaining and RateLimit-Reset on every API response, 429 with Retry-After past the limit.
// Requests without a valid credential (including failed authentication) count against the IP.
import type { NextFunction, Request, Response } from 'express';
import type { AppContext } from '../http/context';
import { RateLimitedProblem } from '../http/problem';
import { createRateLimits, type RateLimits } from './rate-limits';
import { recordRequestUsage } from './usage';

const UNMETERED = /^\/(healthz|readyz)$/;

export function createMeter(ctx: AppContext, limits: RateLimits = createRateLimits(ctx.db.sequelize, ctx.config.rateLimits)) {
  return async function meter(req: Request, res: Response, next: NextFunction, authError?: unknown): Promise<void> {
    if (UNMETERED.test(req.path)) return next(authError);
    try {
      const principal = authError ? undefined : req.principal;
      const { allowed, state } = await limits.consumeRequest(principal, req.ip ?? 'unknown');
      res.setHeader('RateLimit-Limit', String(state.limit));
      res.setHeader('RateLimit-Remaining', String(state.remaining));
      res.setHeader('RateLimit-Reset', String(state.resetSeconds));
      if (!allowed) {
        const who = principal ? (principal.kind === 'api-key' ? 'this API key or its organisation' : 'this console user or the organisation') : 'this address';
        return next(new RateLimitedProblem(`Rate limit of ${state.limit} requests per minute reached for ${who}; retry in ${state.resetSeconds} seconds.`, state.resetSeconds));
      }
      if (authError) return next(authError);
      if (principal) await recordRequestUsage(principal);
      next();
    } catch (err) {
      next(authError ?? err);
    }
  };
}
