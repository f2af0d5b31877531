// Requests Node's HTTP parser refuses before Express sees them — a request line or header that is
// not HTTP/1.1, headers over the size limit, a body framing that cannot be read, a request that
// took too long to arrive, an HTTP/1.1 request without a Host header — answered as RFC 9457
// problems like every other refusal, instead of Node's bare status line. Installed on each HTTP
// server the process runs (server.ts).
import type { IncomingMessage, Server, ServerResponse } from 'node:http';
import type { Duplex } from 'node:stream';
import { PROBLEM_BASE } from './problem';

const REASONS: Record<number, string> = { 400: 'Bad Request', 408: 'Request Timeout', 413: 'Content Too Large', 431: 'Request Header Fields Too Large' };

/** The status and problem for a parser error code (llhttp's HPE_* codes, Node's ERR_HTTP_*). */
export function clientErrorProblem(code: string | undefined): { status: number; type: string; title: string; detail: string } {
  if (code === 'HPE_HEADER_OVERFLOW') {
    return { status: 431, type: 'headers-too-large', title: 'Request header fields too large', detail: 'The request line and headers together are larger than this server accepts (16 KiB).' };
  }
  if (code === 'ERR_HTTP_REQUEST_TIMEOUT' || code === 'ERR_HTTP_HEADERS_TIMEOUT') {
    return { status: 408, type: 'request-timeout', title: 'Request timeout', detail: 'The request did not arrive in full in time.' };
  }
  return {
    status: 400,
    type: 'malformed-request',
    title: 'Malformed HTTP request',
    detail: `The request could not be read as HTTP/1.1 (${code ?? 'parse error'}): check the request line, the headers and the body's framing (Content-Length or chunked).`,
  };
}

/** An HTTP/1.1 request without a Host header (RFC 9112 §3.2: the server must answer 400). */
export const MISSING_HOST_PROBLEM = {
  status: 400,
  type: 'malformed-request',
  title: 'Malformed HTTP request',
  detail: 'An HTTP/1.1 request must carry a Host header (RFC 9112, section 3.2).',
};

function problemText(p: { status: number; type: string; title: string; detail: string }): string {
  return JSON.stringify({ type: PROBLEM_BASE + p.type, title: p.title, status: p.status, detail: p.detail });
}

export function answerClientErrorsAsProblems(server: Server): void {
  server.on('clientError', (err: NodeJS.ErrnoException, socket: Duplex) => {
    if (err.code === 'ECONNRESET' || !socket.writable) return void socket.destroy();
    const p = clientErrorProblem(err.code);
    const body = problemText(p);
    socket.end(
      `HTTP/1.1 ${p.status} ${REASONS[p.status]}\r\nContent-Type: application/problem+json\r\nContent-Length: ${Buffer.byteLength(body)}\r\nConnection: close\r\n\r\n${body}`,
    );
  });
  // Node answers an HTTP/1.1 request without a Host header with a bare 400 before any listener
  // sees it; told not to, the server hands it to the listeners, and here it gets the problem
  // instead. (The listeners already on the server — the app — get every other request.)
  (server as Server & { requireHostHeader: boolean }).requireHostHeader = false;
  const listeners = server.listeners('request') as ((req: IncomingMessage, res: ServerResponse) => void)[];
  server.removeAllListeners('request');
  server.on('request', (req: IncomingMessage, res: ServerResponse) => {
    if (req.headers.host === undefined && req.httpVersionMajor === 1 && req.httpVersionMinor >= 1) {
      const body = problemText(MISSING_HOST_PROBLEM);
      res.writeHead(400, { 'Content-Type': 'application/problem+json', 'Content-Length': Buffer.byteLength(body), Connection: 'close' });
      res.end(body);
      return;
    }
    for (const listener of listeners) listener.call(server, req, res);
  });
}
