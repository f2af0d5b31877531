// The HTTP server of one API process, with its own limits against slow and many clients:
//   - the request line and headers must arrive within the headers timeout;
//   - the whole request within the headers timeout plus the largest body limit at the slowest
//     accepted rate (request-body.ts holds each operation to its own, smaller, limit at that rate);
//   - an idle keep-alive connection is closed after the keep-alive timeout;
//   - beyond maxConnections open connections, Node closes a new connection at once.
// Node checks the first two every `connectionsCheckingInterval`, 30 s by default (which made a 60 s
// headers timeout last up to 89 s); here every quarter of the headers timeout, at most every second.
import { createServer, type RequestListener, type Server } from 'node:http';
import type { HttpServerConfig } from '../config';

/** The time a whole request may take to arrive: headers, then a body of `bodyLimitBytes` at the slowest accepted rate. */
export function requestTimeoutMs(limits: HttpServerConfig, bodyLimitBytes: number): number {
  return limits.headersTimeoutMs + Math.ceil((bodyLimitBytes / limits.minBodyBytesPerSecond) * 1000);
}

export function createHttpServer(app: RequestListener, limits: HttpServerConfig, bodyLimitBytes: number): Server {
  const server = createServer(
    {
      headersTimeout: limits.headersTimeoutMs,
      requestTimeout: requestTimeoutMs(limits, bodyLimitBytes),
      connectionsCheckingInterval: Math.max(100, Math.min(1000, Math.floor(limits.headersTimeoutMs / 4))),
    },
    app,
  );
  server.keepAliveTimeout = limits.keepAliveTimeoutMs;
  server.maxConnections = limits.maxConnections;
  return server;
}
