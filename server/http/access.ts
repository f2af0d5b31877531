// Authentication (who is calling) and authorisation (may they call this operation), as HTTP
// plumbing: a bearer credential and other ways of signing in are checked by what the identity area
// registers here (identity/authentication.ts); the rule for each operation is declared once, as
// `x-lotproof-access` in the OpenAPI document.
import passport from 'passport';
import { Strategy as BearerStrategy } from 'passport-http-bearer';
import type { RequestHandler } from 'express';
import type { Access } from '../../openapi/load';
import { holdsAnyRole, type Principal, type Scope } from '../core/principal';
import { ForbiddenProblem, UnauthorizedProblem } from './problem';

declare module 'express-serve-static-core' {
  interface Request {
    principal?: Principal;
    /** The bytes of the body as read (request-body.ts): a JSON body as received, a CSV body as UTF-8 without a BOM. */
    rawBody?: Buffer;
  }
}

/** The answer to a bearer credential: who it is, or why it is refused (said to the caller). */
export type BearerCheck = { ok: true; principal: Principal } | { ok: false; detail: string };
let verifyBearer: ((token: string) => Promise<BearerCheck>) | null = null;
/** Sets how a bearer credential is checked (the identity area's API keys). */
export function setBearerVerifier(verify: (token: string) => Promise<BearerCheck>): void {
  verifyBearer = verify;
}

const failures = new WeakMap<object, string>();

passport.use(
  new BearerStrategy({ passReqToCallback: true, realm: 'lotproof' }, (req: object, token: string, done: (err: unknown, user?: Principal | false) => void) => {
    if (!verifyBearer) return done(new Error('no bearer verifier registered'));
    verifyBearer(token).then(
      (check) => {
        if (check.ok) return done(null, check.principal);
        failures.set(req, check.detail);
        done(null, false);
      },
      (err) => done(err),
    );
  }),
);

/** Other ways of signing in (console sessions) register a resolver here; the first that answers wins. */
export type PrincipalResolver = (req: Parameters<RequestHandler>[0]) => Promise<Principal | null>;
const resolvers: PrincipalResolver[] = [];
export function addPrincipalResolver(resolver: PrincipalResolver): void {
  resolvers.push(resolver);
}

/** Sets req.principal from a bearer API key or a registered resolver. A bad bearer credential is a 401 at once. */
export const authenticate: RequestHandler = (req, res, next) => {
  if (/^bearer\s/i.test(req.headers.authorization ?? '')) {
    passport.authenticate('bearer', { session: false }, (err: unknown, principal: Principal | false) => {
      if (err) return next(err);
      if (!principal) {
        res.setHeader('WWW-Authenticate', 'Bearer realm="lotproof", error="invalid_token"');
        return next(new UnauthorizedProblem(failures.get(req) ?? 'The bearer credential is not valid.'));
      }
      req.principal = principal;
      next();
    })(req, res, next);
    return;
  }
  (async () => {
    for (const resolve of resolvers) {
      const p = await resolve(req);
      if (p) {
        req.principal = p;
        break;
      }
    }
  })().then(() => next(), next);
};

/** True when the principal passes the declared rule. */
export function allows(access: Access, p: Principal): boolean {
  if (access === 'public') return true;
  if (p.kind === 'api-key') return (access.scopes ?? []).some((s) => p.scopes.includes(s as Scope));
  // a session holds one or more roles: any one of them allowed is enough
  return holdsAnyRole(p, access.roles ?? []);
}

export function authorize(access: Access, operationId: string): RequestHandler {
  return (req, res, next) => {
    if (access === 'public') return next();
    const p = req.principal;
    if (!p) {
      res.setHeader('WWW-Authenticate', 'Bearer realm="lotproof"');
      return next(new UnauthorizedProblem('This operation needs an API key (Authorization: Bearer …) or a console session.'));
    }
    if (!allows(access, p)) {
      const need = p.kind === 'api-key'
        ? `an API key with one of the scopes ${(access.scopes ?? []).join(', ') || '(none: console only)'}`
        : `a console role among ${(access.roles ?? []).join(', ') || '(none: API keys only)'}`;
      return next(new ForbiddenProblem(`${operationId} needs ${need}.`));
    }
    next();
  };
}
