// The Express application: one place that wires middleware, the OpenAPI-declared routes, the docs,
// the console and the problem-details error handler. Nothing here decides a business rule.
import { randomUUID } from 'node:crypto';
import { existsSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import express, { type Express } from 'express';
import cookieParser from 'cookie-parser';
import helmet from 'helmet';
import { pinoHttp } from 'pino-http';
import swaggerUi from 'swagger-ui-express';
import { DOCS_LOOK, serveDocsAssets } from './docs-look';
import * as OpenApiValidator from 'express-openapi-validator';
import { loadApiDocument, operationsOf } from '../openapi/load';
import { authenticate, authorize } from './http/access';
import { clientIp } from './http/client-ip';
import { createMeter } from './metering/request-meter.http';
import { inputGuards, storableFormats } from './http/input-guards';
import { readBody } from './http/request-body';
import { registerAuthentication } from './identity/authentication.http';
import { IDLE_MINUTES_LOCAL } from './identity/session-cookie.http';
import type { AppContext } from './http/context';
import { notFoundHandler, PayloadTooLargeProblem, problemHandler } from './http/problem';
import { handlersFor } from './routes';

const root = join(dirname(fileURLToPath(import.meta.url)), '..');
export const CONSOLE_DIST = join(root, 'dist', 'console');
const API_PATH = /^\/(v1|healthz|readyz|\.well-known)(\/|$)/;
const REQUEST_ID = /^[A-Za-z0-9._-]{1,100}$/;

/** OpenAPI "/v1/verdicts/{id}" → Express "/v1/verdicts/:id". */
function expressPath(path: string): string {
  return path.replace(/\{([^}]+)\}/g, ':$1');
}

export function createApp(ctx: AppContext): Express {
  const doc = loadApiDocument();
  const operations = operationsOf(doc);
  const handlers = handlersFor(ctx, operations);

  const app = express();
  // Paths are matched as the document writes them: /V1/session or /v1/me/ is no route (a 404
  // problem), so no request reaches a handler past what API_PATH selects (authentication, rate
  // limits, validation, input guards). Set before the first route: the router reads them once.
  app.set('case sensitive routing', true);
  app.set('strict routing', true);
  app.disable('x-powered-by');
  app.set('trust proxy', ctx.config.trustProxy);
  app.set('query parser', 'extended');
  app.use(clientIp);

  // One line per finished request with pino-http: request id, method, path, remote address, status,
  // duration. Only what is safe to keep: no headers (Authorization, Cookie), no bodies, no query strings.
  app.use(
    pinoHttp({
      logger: ctx.logger,
      quietReqLogger: true,
      genReqId: (req, res) => {
        const incoming = req.headers['x-request-id'];
        const id = typeof incoming === 'string' && REQUEST_ID.test(incoming) ? incoming : randomUUID();
        res.setHeader('X-Request-Id', id);
        return id;
      },
      serializers: {
        req: (req) => ({ id: req.id, method: req.method, path: String(req.url).split('?')[0], remoteAddress: req.remoteAddress }),
        res: (res) => ({ statusCode: res.statusCode }),
      },
      customLogLevel: (_req, res, err) => (err || res.statusCode >= 500 ? 'error' : res.statusCode >= 400 ? 'info' : 'debug'),
      autoLogging: { ignore: (req) => req.url === '/healthz' },
    }),
  );
  // HEAD is GET without the body (RFC 9110 §9.3.2), and a general-purpose server must answer it:
  // load balancers probe /healthz and /readyz with either. Node's response already knows it sends
  // no body for HEAD, so the request goes on as a GET through validation and routing (the request
  // log above has already noted it as HEAD).
  app.use((req, _res, next) => {
    if (req.method === 'HEAD' && API_PATH.test(req.path)) req.method = 'GET';
    next();
  });
  app.use(
    helmet({
      contentSecurityPolicy: {
        directives: {
          'script-src': ["'self'"],
          'img-src': ["'self'", 'data:'],
          'connect-src': ["'self'"],
        },
      },
      crossOriginEmbedderPolicy: false,
    }),
  );

  // The document itself and the interactive docs (Swagger UI's assets are served from node_modules).
  serveDocsAssets(app);
  app.get('/v1/openapi.json', (_req, res) => {
    res.json(doc);
  });
  app.use(
    '/docs',
    swaggerUi.serve,
    swaggerUi.setup(doc, {
      ...DOCS_LOOK,
      // persistAuthorization off: a pasted API key must not outlive the page in the browser's storage;
      // validatorUrl null: no badge that sends the document to an outside validator
      swaggerOptions: { persistAuthorization: false, tryItOutEnabled: true, displayRequestDuration: true, validatorUrl: null },
    }),
  );

  const limit = ctx.config.bodyLimitBytes;
  app.use((req, _res, next) => {
    const declared = Number(req.headers['content-length'] ?? 0);
    if (declared > limit) return next(new PayloadTooLargeProblem(`The body is ${declared} bytes; the limit is ${limit} bytes.`));
    next();
  });

  // Console sessions (cookie) besides bearer keys; then rate limits and usage for every API request.
  app.locals[IDLE_MINUTES_LOCAL] = ctx.config.sessions.idleMinutes;
  registerAuthentication();
  app.use(cookieParser());
  const meter = createMeter(ctx);
  app.use((req, res, next) => (API_PATH.test(req.path) ? authenticate(req, res, (err?: unknown) => void meter(req, res, next, err)) : next()));
  // Bodies are read only for a declared operation, once the caller is known and may call it: nobody
  // without a valid credential (or on an undeclared path) makes the server read or parse a body, and
  // for a large lot the credential check runs while the body is still arriving.
  //
  // Each operation reads its body its own way (http/request-body.ts): never compressed, within its
  // limit (small but for lots) and its time, a JSON body checked for UTF-8 and nesting before it is
  // parsed. The raw bytes stay on the request (a reference, not a copy): an Idempotency-Key
  // fingerprints the body as sent rather than serialising a parsed million-value lot again.
  for (const op of operations) {
    app[op.method](expressPath(op.path), authorize(op.access, op.operationId), readBody(op.operationId, ctx.config));
  }
  app.use(
    OpenApiValidator.middleware({
      apiSpec: doc as any,
      // Bodies are never coerced (a null or "true" measurement must be refused, not read as 0 or 1);
      // query and path parameters are always coerced by the validator.
      validateRequests: { allowUnknownQueryParameters: false, coerceTypes: false },
      validateResponses: ctx.config.validateResponses,
      validateSecurity: false,
      validateFormats: true,
      formats: storableFormats,
      ignorePaths: (path: string) => !API_PATH.test(path),
      ignoreUndocumented: false,
    }),
  );
  app.use((req, res, next) => (API_PATH.test(req.path) ? inputGuards(req, res, next) : next()));
  for (const op of operations) {
    app[op.method](expressPath(op.path), handlers[op.operationId]!);
  }

  // The console: built by Vite into dist/console, served from the same origin.
  if (existsSync(join(CONSOLE_DIST, 'index.html'))) {
    app.use(express.static(CONSOLE_DIST, { index: false, maxAge: '1h' }));
    // (an API path in another case is no console route either: /V1/me is a 404 problem)
    app.get(/^(?!\/(v1|docs|healthz|readyz|\.well-known)(\/|$)).*/i, (_req, res) => {
      res.sendFile(join(CONSOLE_DIST, 'index.html'));
    });
  }

  app.use(notFoundHandler);
  app.use(problemHandler);
  return app;
}
