// RFC 9457 problem details, rendered in one place: the transport-neutral failures the areas throw
// (server/core/errors.ts) get their status here and their fields' pointers into the request as
// sent; the HTTP plumbing's own refusals (authentication, body limits, the validator) are
// ProblemErrors already.
import type { ErrorRequestHandler, Request, RequestHandler, Response } from 'express';
import { Conflict, Failure, type FieldIssue, InvalidInput, NotAllowed, NotAuthenticated, NotFound, Refused, TooLarge, TooMany, Unavailable } from '../core/errors';

export const PROBLEM_BASE = 'https://lotproof.dev/problems/';

export interface InvalidParam {
  /** JSON pointer (RFC 6901) of the bad field within the request, e.g. "/body/measurements/17". */
  pointer: string;
  detail: string;
}

export interface ProblemBody {
  type: string;
  title: string;
  status: number;
  detail?: string;
  instance?: string;
  errors?: InvalidParam[];
  [extension: string]: unknown;
}

/** An error a client can cause or must hear about; rendered as problem+json. */
export class ProblemError extends Error {
  constructor(
    readonly status: number,
    readonly kind: string,
    readonly title: string,
    detail?: string,
    readonly extensions: Record<string, unknown> = {},
  ) {
    super(detail ?? title);
  }
  get detail(): string {
    return this.message;
  }
}

export class ValidationProblem extends ProblemError {
  constructor(detail: string, readonly errors: InvalidParam[], status = 400) {
    super(status, 'validation', 'Request is not valid', detail, { errors });
  }
}
export class UnauthorizedProblem extends ProblemError {
  constructor(detail = 'A valid bearer credential is required.') {
    super(401, 'unauthorized', 'Not authenticated', detail);
  }
}
export class ForbiddenProblem extends ProblemError {
  constructor(detail: string) {
    super(403, 'forbidden', 'Not allowed', detail);
  }
}
export class NotFoundProblem extends ProblemError {
  constructor(detail: string) {
    super(404, 'not-found', 'Not found', detail);
  }
}
export class ConflictProblem extends ProblemError {
  constructor(detail: string, kind = 'conflict') {
    super(409, kind, 'Conflict', detail);
  }
}
export class UnprocessableProblem extends ProblemError {
  constructor(detail: string, kind = 'unprocessable', extensions: Record<string, unknown> = {}) {
    super(422, kind, 'Request cannot be processed', detail, extensions);
  }
}
export class PayloadTooLargeProblem extends ProblemError {
  constructor(detail: string) {
    super(413, 'payload-too-large', 'Request body too large', detail);
  }
}
export class RateLimitedProblem extends ProblemError {
  constructor(detail: string, readonly retryAfterSeconds: number) {
    super(429, 'rate-limited', 'Too many requests', detail);
  }
}
export class UnavailableProblem extends ProblemError {
  constructor(detail: string) {
    super(503, 'unavailable', 'Service unavailable', detail);
  }
}

export function sendProblem(res: Response, problem: ProblemBody): void {
  res.status(problem.status).type('application/problem+json').send(JSON.stringify(problem));
}

const DB_DOWN_NAMES = new Set([
  'SequelizeConnectionError',
  'SequelizeConnectionRefusedError',
  'SequelizeConnectionAcquireTimeoutError',
  'SequelizeHostNotReachableError',
  'SequelizeConnectionTimedOutError',
  'SequelizeAccessDeniedError',
]);
const DB_DOWN_CODES = new Set(['ECONNREFUSED', 'ECONNRESET', 'ETIMEDOUT', '57P01', '57P02', '57P03', '08006', '08001', '08003']);

/**
 * True for errors that mean "the database is not reachable right now". pg's own messages for a
 * client whose connection broke (or that was closed) before a query was sent are among them: that
 * query never reached the server.
 */
export function isDatabaseUnavailable(err: unknown): boolean {
  let e: unknown = err;
  for (let depth = 0; e && typeof e === 'object' && depth < 5; depth++) {
    const o = e as { name?: string; code?: string; message?: string; parent?: unknown; original?: unknown; cause?: unknown };
    if (o.name && DB_DOWN_NAMES.has(o.name)) return true;
    if (o.code && DB_DOWN_CODES.has(o.code)) return true;
    if (o.message && /Connection terminated|terminating connection|the database system is (starting up|shutting down)|Client has encountered a connection error and is not queryable|Client was closed and is not queryable/i.test(o.message)) return true;
    e = o.parent ?? o.original ?? o.cause;
  }
  return false;
}

/** Turns express-openapi-validator's error paths ("/body/measurements/3", ".body.lotSize") into JSON pointers. */
function toPointer(path: string | undefined): string {
  if (!path) return '';
  if (path.startsWith('/')) return path;
  return '/' + path.replace(/^\./, '').replace(/\[(\d+)\]/g, '.$1').split('.').filter(Boolean).join('/');
}

interface ValidatorError {
  status?: number;
  statusCode?: number;
  message?: string;
  errors?: Array<{ path?: string; message?: string; errorCode?: string }>;
  type?: string;
  name?: string;
  headers?: Record<string, string>;
}

/** The status of each failure kind, and the title of a status (a few codes have titles of their own). */
const FAILURE_STATUS: [abstract new (...args: never[]) => Failure, number][] = [
  [InvalidInput, 400],
  [NotAuthenticated, 401],
  [NotAllowed, 403],
  [NotFound, 404],
  [Conflict, 409],
  [TooLarge, 413],
  [Refused, 422],
  [TooMany, 429],
  [Unavailable, 503],
];
const STATUS_TITLE: Record<number, string> = {
  400: 'Request is not valid',
  401: 'Not authenticated',
  403: 'Not allowed',
  404: 'Not found',
  409: 'Conflict',
  413: 'Request body too large',
  422: 'Request cannot be processed',
  429: 'Too many requests',
  503: 'Service unavailable',
};
const CODE_TITLE: Record<string, string> = { validation: 'Request is not valid' };

/**
 * Where a field of a rule's input ("/expiresAt") was in the request: a path parameter, a query
 * parameter, or the body ("/path/…", "/query/…", "/body/…"). The first segment decides; a request
 * without a body names the query.
 */
export function requestPointer(req: Pick<Request, 'params' | 'query' | 'body' | 'method'> | undefined, field: string): string {
  if (!req) return field;
  const first = decodeURIComponent(field.split('/')[1] ?? '').replace(/~1/g, '/').replace(/~0/g, '~');
  const has = (o: unknown) => typeof o === 'object' && o !== null && !Array.isArray(o) && first in (o as object);
  if (first && has(req.params)) return `/path${field}`;
  if (first && has(req.query)) return `/query${field}`;
  if (has(req.body) || (req.method !== 'GET' && req.method !== 'DELETE' && req.method !== 'HEAD')) return `/body${field}`;
  return `/query${field}`;
}

/** Where a field issue points in the request, and how it reads there. */
export type LocateField = (issue: FieldIssue) => InvalidParam & { line?: number };

/**
 * A failure as a problem: its status by kind, each field issue located in the request — by
 * default through `requestPointer`; a route whose fields travel differently (a CSV lot) passes
 * its own `locate`, and may reword the detail to match.
 */
export function failureProblem(
  f: Failure,
  locate: LocateField | Pick<Request, 'params' | 'query' | 'body' | 'method'> | undefined,
  detail: string = f.message,
): ProblemError {
  if (f instanceof TooMany) return new RateLimitedProblem(f.message, f.retryAfterSeconds);
  const status = FAILURE_STATUS.find(([kind]) => f instanceof kind)?.[1] ?? 422;
  const at: LocateField = typeof locate === 'function' ? locate : (x) => ({ pointer: requestPointer(locate, x.field), detail: x.detail });
  const errors = f.fields.map(at);
  const extensions = { ...f.facts, ...(errors.length > 0 ? { errors } : {}) };
  return new ProblemError(status, f.code, CODE_TITLE[f.code] ?? STATUS_TITLE[status]!, detail, extensions);
}

/** Maps any error to a problem body. Unknown errors become a 500 without internals. */
export function toProblem(err: unknown, req?: Request): { problem: ProblemBody; headers: Record<string, string>; unexpected: boolean } {
  const headers: Record<string, string> = {};
  if (err instanceof Failure) err = failureProblem(err, req);
  if (err instanceof ProblemError) {
    if (err instanceof RateLimitedProblem) headers['Retry-After'] = String(err.retryAfterSeconds);
    return {
      problem: { type: PROBLEM_BASE + err.kind, title: err.title, status: err.status, detail: err.detail, ...err.extensions },
      headers,
      unexpected: false,
    };
  }
  if (isDatabaseUnavailable(err)) {
    return {
      problem: {
        type: PROBLEM_BASE + 'unavailable',
        title: 'Service unavailable',
        status: 503,
        detail: 'The database is not reachable right now; nothing was stored. Retry in a few seconds.',
      },
      headers: { 'Retry-After': '5' },
      unexpected: false,
    };
  }
  const e = (err ?? {}) as ValidatorError;
  const status = e.status ?? e.statusCode;
  // body-parser errors
  if (e.type === 'entity.too.large') {
    const { limit } = e as { limit?: number };
    const detail = `The request body is larger than the limit of ${limit ?? '?'} bytes (set by LOTPROOF_BODY_LIMIT_MB). Split the lot or send it as text/csv.`;
    return {
      problem: { type: PROBLEM_BASE + 'payload-too-large', title: 'Request body too large', status: 413, detail },
      headers,
      unexpected: false,
    };
  }
  if (e.type === 'entity.parse.failed') {
    return {
      problem: { type: PROBLEM_BASE + 'malformed-body', title: 'Malformed request body', status: 400, detail: `The body is not valid JSON: ${e.message ?? ''}`.trim() },
      headers,
      unexpected: false,
    };
  }
  if (typeof status === 'number' && status >= 400 && status < 500) {
    const kinds: Record<number, [string, string]> = {
      400: ['validation', 'Request is not valid'],
      401: ['unauthorized', 'Not authenticated'],
      403: ['forbidden', 'Not allowed'],
      404: ['not-found', 'Not found'],
      405: ['method-not-allowed', 'Method not allowed'],
      406: ['not-acceptable', 'Not acceptable'],
      413: ['payload-too-large', 'Request body too large'],
      415: ['unsupported-media-type', 'Unsupported media type'],
    };
    const [kind, title] = kinds[status] ?? ['client-error', 'Request cannot be served'];
    const errors = (e.errors ?? []).map((x) => ({ pointer: toPointer(x.path), detail: x.message ?? 'invalid' }));
    const detail = errors.length > 0 ? errors.map((x) => `${x.pointer || '(request)'}: ${x.detail}`).join('; ') : (e.message ?? title);
    if (e.headers) Object.assign(headers, e.headers);
    return {
      problem: { type: PROBLEM_BASE + kind, title, status, detail, ...(errors.length > 0 ? { errors } : {}) },
      headers,
      unexpected: false,
    };
  }
  return {
    problem: { type: PROBLEM_BASE + 'internal', title: 'Internal error', status: 500, detail: 'An unexpected error occurred; it has been logged with the request id.' },
    headers,
    unexpected: true,
  };
}

export const problemHandler: ErrorRequestHandler = (err, req, res, _next) => {
  const { problem, headers, unexpected } = toProblem(err, req);
  if (unexpected) req.log?.error({ err }, 'unexpected error');
  else if (problem.status >= 500) req.log?.warn({ problem: problem.type }, problem.detail);
  if (res.headersSent) {
    res.end();
    return;
  }
  for (const [k, v] of Object.entries(headers)) res.setHeader(k, v);
  sendProblem(res, { ...problem, instance: req.originalUrl.split('?')[0], requestId: String(req.id ?? '') });
};

export const notFoundHandler: RequestHandler = (req, _res, next) => {
  next(new NotFoundProblem(`No route for ${req.method} ${req.path}. The API lives under /v1; see /docs.`));
};
