// Requests Node's HTTP parser refuses before Express sees them — a request line or header that is
// not HTTP/1.1, headers over the size limit, a body framing that cannot be read, a request that
// took too long to arrive — answered as RFC 9457 problems like every other refusal, instead of
// Node's bare status line. Installed on each HTTP server the process runs (server.ts).
import type { Server } from 'node:http';
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

export function answerClientErrorsAsProblems(server: Server): void {
  server.on('clientError', (err: NodeJS.ErrnoException, socket: Duplex) => {
    if (err.code === 'ECONNRESET' || !socket.writable) return void socket.destroy();
    const p = clientErrorProblem(err.code);
    const body = JSON.stringify({ type: PROBLEM_BASE + p.type, title: p.title, status: p.status, detail: p.detail });
    socket.end(
      `HTTP/1.1 ${p.status} ${REASONS[p.status]}\r\nContent-Type: application/problem+json\r\nContent-Length: ${Buffer.byteLength(body)}\r\nConnection: close\r\n\r\n${body}`,
    );
  });
}
