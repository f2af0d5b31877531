// Response headers that never change per request (helmet's, with a static policy), worked out
// once at start and then set by one small loop instead of a chain of middleware per request.
import type { RequestHandler } from 'express';

export function fixedHeaders(middleware: RequestHandler): RequestHandler {
  const set: [string, string | number | readonly string[]][] = [];
  const removed: string[] = [];
  let called = false;
  const recorder = {
    setHeader(name: string, value: string | number | readonly string[]) {
      set.push([name, value]);
      return recorder;
    },
    removeHeader(name: string) {
      removed.push(name);
    },
  };
  middleware({ headers: {}, method: 'GET', url: '/' } as never, recorder as never, ((err?: unknown) => {
    if (err) throw err;
    called = true;
  }) as never);
  if (!called) throw new Error('fixedHeaders: the middleware did not finish synchronously');
  return (_req, res, next) => {
    for (const name of removed) res.removeHeader(name);
    for (const [name, value] of set) res.setHeader(name, value);
    next();
  };
}
