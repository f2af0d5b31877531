// Request logging: one line per finished request with only what is safe to keep — the request
// id, method, path (no query string), remote address, status and duration; never headers or
// bodies. Cheaper than pino-http on the hot path: no child logger per request (req.log is made on
// first use, i.e. only when a handler logs an error), and nothing is serialised for a line whose
// level is disabled.
import { randomUUID } from 'node:crypto';
import type { IncomingMessage, ServerResponse } from 'node:http';
import type { RequestHandler } from 'express';
import type { Logger } from 'pino';
import type {} from 'pino-http'; // its declarations of req.id and req.log

const REQUEST_ID = /^[A-Za-z0-9._-]{1,100}$/;

type Level = 'error' | 'info' | 'debug';

export function levelFor(status: number, err: unknown): Level {
  return err || status >= 500 ? 'error' : status >= 400 ? 'info' : 'debug';
}

function reqFields(req: IncomingMessage) {
  return { id: req.id, method: req.method, path: String(req.url).split('?')[0], remoteAddress: req.socket?.remoteAddress };
}

export function requestLog(logger: Logger, ignore: (req: IncomingMessage) => boolean): RequestHandler {
  return (req, res, next) => {
    const incoming = req.headers['x-request-id'];
    const id = typeof incoming === 'string' && REQUEST_ID.test(incoming) ? incoming : randomUUID();
    req.id = id;
    res.setHeader('X-Request-Id', id);
    let child: Logger | undefined;
    Object.defineProperty(req, 'log', {
      configurable: true,
      enumerable: false,
      get: () => (child ??= logger.child({ req: reqFields(req) })),
      set: (v: Logger) => {
        child = v;
      },
    });
    if (ignore(req)) return next();
    const start = performance.now();
    const done = (err?: unknown) => {
      res.removeListener('finish', onFinish);
      res.removeListener('close', onClose);
      const e = err ?? (res as ServerResponse & { err?: unknown }).err;
      const level = levelFor(res.statusCode, e);
      if (!logger.isLevelEnabled(level)) return;
      const line: Record<string, unknown> = { req: reqFields(req), res: { statusCode: res.statusCode }, responseTime: Math.round(performance.now() - start) };
      if (e) line.err = e;
      logger[level](line, e ? 'request errored' : 'request completed');
    };
    const onFinish = () => done();
    const onClose = () => {
      if (!res.writableFinished) done(new Error('request aborted'));
    };
    res.on('finish', onFinish);
    res.on('close', onClose);
    next();
  };
}
