// The console's typed API client: openapi-fetch over the types generated from openapi/.
// The session is an HttpOnly cookie the browser sends by itself; nothing is kept in storage.
// Every unsafe request carries X-Lotproof-Console: 1 (the server's CSRF guard for sessions).
import createClient, { type Middleware } from 'openapi-fetch';
import type { paths } from '../../../shared/api/schema';
import { ApiError, isProblem, type Problem } from './problem';

export const UNSAFE_METHODS = new Set(['POST', 'PUT', 'PATCH', 'DELETE']);
export const CONSOLE_HEADER = 'X-Lotproof-Console';

const consoleHeader: Middleware = {
  onRequest({ request }) {
    if (UNSAFE_METHODS.has(request.method.toUpperCase())) request.headers.set(CONSOLE_HEADER, '1');
    return request;
  },
};

/** Listeners told when any call comes back 401 (the session ended): the session store signs out. */
const unauthorisedListeners = new Set<() => void>();
export function onUnauthorised(fn: () => void): () => void {
  unauthorisedListeners.add(fn);
  return () => unauthorisedListeners.delete(fn);
}
const watchSession: Middleware = {
  onResponse({ response, request }) {
    if (response.status === 401 && !new URL(request.url).pathname.startsWith('/v1/session')) {
      for (const fn of unauthorisedListeners) fn();
    }
    return response;
  },
};

export const api = createClient<paths>({ baseUrl: globalThis.location?.origin ?? 'http://localhost', credentials: 'same-origin' });
api.use(consoleHeader, watchSession);

interface Result<T> {
  data?: T;
  error?: unknown;
  response: Response;
}

function problemFrom(error: unknown, response: Response): Problem {
  if (isProblem(error)) return error;
  return {
    type: 'about:blank',
    title: response.statusText || `HTTP ${response.status}`,
    status: response.status,
    detail: typeof error === 'string' && error ? error : undefined,
  };
}

/** The data of a successful call, or an ApiError with the server's problem details. */
export async function call<T>(request: Promise<Result<T>>): Promise<T> {
  let result: Result<T>;
  try {
    result = await request;
  } catch (err) {
    throw new ApiError({
      type: 'about:blank',
      title: 'The service could not be reached',
      status: 0,
      detail: `${err instanceof Error ? err.message : String(err)}. Check the connection and try again.`,
    });
  }
  if (!result.response.ok || result.error !== undefined) throw new ApiError(problemFrom(result.error, result.response));
  return result.data as T;
}

/** A fresh idempotency key for a POST that creates something (a retry of the same click reuses it). */
export function idempotencyKey(): string {
  return crypto.randomUUID();
}
