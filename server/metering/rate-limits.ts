// Rate limits on rate-limiter-flexible's PostgreSQL store, so that every API process shares the
// same counters: requests per key (or console user), per organisation, per IP without a valid
// credential, and failed sign-ins per account and per IP.
import { RateLimiterPostgres, RateLimiterRes } from 'rate-limiter-flexible';
import type { Sequelize } from 'sequelize';
import { perKeyBatches } from '../db/per-key-batches.speedup';
import type { RateLimitConfig } from '../config';
import { TooMany } from '../core/errors';
import type { Principal } from '../core/principal';

const TABLE = 'rate_limits';
const SIGN_IN_WINDOW_SECONDS = 15 * 60;
/** Reset links per account per hour: enough for a lost e-mail, too few to flood an inbox. */
const RESET_MAILS_PER_HOUR = 5;

export interface LimitState {
  limit: number;
  remaining: number;
  /** Seconds until the window resets. */
  resetSeconds: number;
}

export interface RequestVerdict {
  allowed: boolean;
  /** The most constraining of the limits that applied. */
  state: LimitState;
}

function limiter(sequelize: Sequelize, keyPrefix: string, points: number, duration: number): RateLimiterPostgres {
  return new RateLimiterPostgres({
    storeClient: sequelize,
    storeType: 'sequelize',
    tableName: TABLE,
    tableCreated: true,
    keyPrefix,
    points,
    duration,
  });
}

function stateOf(res: RateLimiterRes, points: number): LimitState {
  return { limit: points, remaining: Math.max(0, res.remainingPoints), resetSeconds: Math.max(1, Math.ceil(res.msBeforeNext / 1000)) };
}

type Decision = { ok: boolean; state: LimitState };

/**
 * Consumes request points for a key with at most one upsert in flight per key and process:
 * requests that arrive while one is on its way are added up and consumed together with
 * consume(key, n), and each gets the answer it would have had in turn (the i-th of n sees
 * consumed = total − n + i + 1). The counter stays in PostgreSQL, so every process shares it; but
 * a busy key no longer queues one commit per request behind the same row lock, which had capped
 * the whole API near one request per commit.
 */
function coalesced(l: RateLimiterPostgres): (key: string) => Promise<Decision> {
  return perKeyBatches(async (key, n) => {
    let res: RateLimiterRes;
    try {
      res = await l.consume(key, n);
    } catch (e) {
      if (!(e instanceof RateLimiterRes)) throw e;
      res = e; // over the limit: the library rejects with the counter's state
    }
    const resetSeconds = Math.max(1, Math.ceil(res.msBeforeNext / 1000));
    return (i) => {
      const consumed = res.consumedPoints - n + i + 1;
      return { ok: consumed <= l.points, state: { limit: l.points, remaining: Math.max(0, l.points - consumed), resetSeconds } };
    };
  });
}

export interface RateLimits {
  /** Counts one request against the caller's limits (or the IP's, without a valid credential). */
  consumeRequest(principal: Principal | undefined, ip: string): Promise<RequestVerdict>;
  /** Throws a 429 problem when the account or IP has failed to sign in too often. */
  assertSignInAllowed(email: string, ip: string): Promise<void>;
  signInFailed(email: string, ip: string): Promise<void>;
  signInSucceeded(email: string): Promise<void>;
  /** False once an account has been sent too many reset links this hour (the caller then sends none). */
  allowPasswordResetMail(email: string): Promise<boolean>;
}

export function createRateLimits(sequelize: Sequelize, cfg: RateLimitConfig): RateLimits {
  const perKey = limiter(sequelize, 'key', cfg.perKeyPerMinute, 60);
  const perOrg = limiter(sequelize, 'org', cfg.perOrganisationPerMinute, 60);
  const perIp = limiter(sequelize, 'ip', cfg.perIpPerMinute, 60);
  const failAccount = limiter(sequelize, 'signin-account', cfg.signInFailuresPerAccount, SIGN_IN_WINDOW_SECONDS);
  const failIp = limiter(sequelize, 'signin-ip', cfg.signInFailuresPerIp, SIGN_IN_WINDOW_SECONDS);
  const resetMail = limiter(sequelize, 'reset-mail', RESET_MAILS_PER_HOUR, 3600);

  const perKeyShared = coalesced(perKey);
  const perOrgShared = coalesced(perOrg);
  const perIpShared = coalesced(perIp);

  async function consume(l: RateLimiterPostgres, key: string): Promise<{ ok: boolean; state: LimitState }> {
    try {
      return { ok: true, state: stateOf(await l.consume(key), l.points) };
    } catch (e) {
      if (e instanceof RateLimiterRes) return { ok: false, state: stateOf(e, l.points) };
      throw e;
    }
  }

  async function blocked(l: RateLimiterPostgres, key: string): Promise<number | null> {
    const res = await l.get(key);
    return res && res.consumedPoints >= l.points ? Math.max(1, Math.ceil(res.msBeforeNext / 1000)) : null;
  }

  return {
    async consumeRequest(principal, ip) {
      const checks = principal
        ? await Promise.all([
            perKeyShared(principal.kind === 'api-key' ? `k:${principal.keyId}` : `u:${principal.userId}`),
            perOrgShared(principal.organisationId),
          ])
        : [await perIpShared(ip)];
      const refused = checks.filter((c) => !c.ok);
      const pick = (refused.length ? refused : checks).reduce((a, b) =>
        refused.length ? (a.state.resetSeconds >= b.state.resetSeconds ? a : b) : a.state.remaining <= b.state.remaining ? a : b,
      );
      return { allowed: refused.length === 0, state: pick.state };
    },
    async assertSignInAllowed(email, ip) {
      const wait = Math.max((await blocked(failAccount, email)) ?? 0, (await blocked(failIp, ip)) ?? 0);
      if (wait > 0) {
        throw new TooMany(`Too many failed sign-ins for this account or from this address; try again in ${wait} seconds.`, wait);
      }
    },
    async signInFailed(email, ip) {
      await Promise.all([consume(failAccount, email), consume(failIp, ip)]);
    },
    async signInSucceeded(email) {
      await failAccount.delete(email);
    },
    async allowPasswordResetMail(email) {
      return (await consume(resetMail, email)).ok;
    },
  };
}
