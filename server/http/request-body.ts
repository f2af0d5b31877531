// Reading a request's body, per operation, before anything parses it. A body is read only for a
// declared operation, once the caller may call it (app.ts), and then:
//   - never inflated: no operation takes a compressed body, and an inflated one is how a 73-byte
//     request became 39 MiB of brackets; Content-Encoding other than identity is a 415 problem;
//   - held to its operation's limit: the full LOTPROOF_BODY_LIMIT_MB for the operations that take
//     lots (FULL_LIMIT_OPERATIONS below, the one list of them), LOTPROOF_SMALL_BODY_LIMIT_KB for
//     every other — the anonymous and identity operations among them;
//   - given its operation's time: the headers timeout plus its limit at the slowest accepted rate
//     (LOTPROOF_MIN_BODY_RATE_KB), so a trickled sign-in is cut in seconds, not at the server's
//     request timeout, which is sized for the biggest lot;
//   - JSON: its raw bytes checked before JSON.parse — UTF-8 that decodes (a broken byte would
//     become U+FFFD and be sealed) and no nesting deeper than MAX_DEPTH (found with a few native
//     searches; the byte walk runs only when there are that many brackets) — and kept as
//     `req.rawBody` (the Idempotency-Key fingerprint, the input guards' escape search);
//   - CSV: kept as UTF-8 bytes in `req.rawBody` (a leading BOM dropped, another declared charset
//     converted, as the text parser did), for lot-csv.http.ts to read in slices; `req.body` is the
//     empty string, for the validator's `type: string`, never the text itself.
//
// The bytes are read by our own few lines, not by express.json/express.text (body-parser): those
// collect the chunks and join them once the body has ended, one synchronous copy of the whole body
// into fresh memory — measured at 350–550 ms for a 29 MB CSV on the test machine, with every other
// request waiting. Here each chunk is copied as it arrives into one buffer of the declared length
// (of the limit for a chunked body: its pages are only touched as they are written), so that cost
// is spread over the upload.
import { isUtf8 } from 'node:buffer';
import type { Request, RequestHandler, Response } from 'express';
import type { Config } from '../config';
import { tooDeepAt, MAX_DEPTH } from './input-guards';
import { PayloadTooLargeProblem, ProblemError, ValidationProblem } from './problem';

/** The operations that take a lot (or a sealed record of one) and so the full body limit; every other gets the small one. */
export const FULL_LIMIT_OPERATIONS: ReadonlySet<string> = new Set(['submitLot', 'verifySeal']);

type Limits = Pick<Config, 'bodyLimitBytes' | 'smallBodyLimitBytes' | 'http'>;

interface BodyLimit {
  bytes: number;
  /** The variable that sets it, named in a 413. */
  variable: string;
}

/** The body limit of an operation, in bytes, and the variable that sets it. */
export function bodyLimitOf(operationId: string, config: Limits): BodyLimit {
  return FULL_LIMIT_OPERATIONS.has(operationId)
    ? { bytes: config.bodyLimitBytes, variable: 'LOTPROOF_BODY_LIMIT_MB' }
    : { bytes: Math.min(config.smallBodyLimitBytes, config.bodyLimitBytes), variable: 'LOTPROOF_SMALL_BODY_LIMIT_KB' };
}

/** As body-parser decides it: a request framed with a length (zero included) or chunked has a body. */
const hasBody = (req: Request) => req.headers['transfer-encoding'] !== undefined || !Number.isNaN(Number(req.headers['content-length']));

const JSON_TYPES = ['application/json', 'application/*+json'];
const CSV_TYPES = ['text/csv', 'text/plain'];
const BOM = Buffer.from([0xef, 0xbb, 0xbf]);
const CHARSET = /;\s*charset\s*=\s*"?([^";\s]+)"?/i;
const charsetOf = (req: Request) => CHARSET.exec(req.headers['content-type'] ?? '')?.[1]?.toLowerCase() ?? null;

function unsupportedMediaType(detail: string): ProblemError {
  return new ProblemError(415, 'unsupported-media-type', 'Unsupported media type', detail);
}

/** A body that is not UTF-8, refused with a pointer to it and the offset of its first broken sequence. */
function notUtf8(buf: Buffer): ValidationProblem {
  const detail = `must be UTF-8 (RFC 8259); the byte sequence at offset ${firstInvalidUtf8(buf)} does not decode`;
  return new ValidationProblem(`/body: ${detail}`, [{ pointer: '/body', detail }]);
}

/** Offset of the first byte sequence that is not well-formed UTF-8 (only called on a body isUtf8 refused). */
function firstInvalidUtf8(b: Buffer): number {
  for (let i = 0; i < b.length; ) {
    const c = b[i]!;
    if (c < 0x80) {
      i++;
      continue;
    }
    // continuation bytes after the lead byte, and the range of the first (RFC 3629's table)
    const [n, lo, hi] =
      c >= 0xc2 && c <= 0xdf ? [1, 0x80, 0xbf]
      : c === 0xe0 ? [2, 0xa0, 0xbf]
      : c === 0xed ? [2, 0x80, 0x9f]
      : c >= 0xe1 && c <= 0xef ? [2, 0x80, 0xbf]
      : c === 0xf0 ? [3, 0x90, 0xbf]
      : c === 0xf4 ? [3, 0x80, 0x8f]
      : c >= 0xf1 && c <= 0xf3 ? [3, 0x80, 0xbf]
      : [0, 0, 0];
    // a lead byte that starts no sequence, or a sequence cut short by the end of the body
    if (n === 0 || i + n >= b.length) return i;
    if (b[i + 1]! < lo || b[i + 1]! > hi) return i;
    for (let k = 2; k <= n; k++) if (b[i + k]! < 0x80 || b[i + k]! > 0xbf) return i;
    i += n + 1;
  }
  return b.length;
}

/** A JSON body's value, as body-parser's strict parser gave it (an empty body is {}); its errors read as body-parser's did. */
function parseJson(buf: Buffer): unknown {
  const text = buf.toString('utf8', buf.subarray(0, 3).equals(BOM) ? 3 : 0);
  if (text.length === 0) return {};
  const first = /\S/.exec(text);
  const notJson = (message: string) => Object.assign(new SyntaxError(message), { status: 400, type: 'entity.parse.failed' });
  if (!first) throw notJson('Unexpected end of JSON input');
  if (first[0] !== '{' && first[0] !== '[') throw notJson(`Unexpected token '${first[0]}' at position ${first.index}: the body must be a JSON object or array`);
  try {
    return JSON.parse(text);
  } catch (err) {
    throw notJson((err as Error).message);
  }
}

/** The checks on a JSON body's bytes before it is parsed: UTF-8 that decodes, nesting no deeper than MAX_DEPTH. */
function checkJsonBytes(buf: Buffer): void {
  if (!isUtf8(buf)) throw notUtf8(buf);
  const deep = tooDeepAt(buf);
  if (deep !== null) {
    const detail = `is nested deeper than ${MAX_DEPTH} levels`;
    throw new ValidationProblem(`${deep}: ${detail}`, [{ pointer: deep, detail }]);
  }
}

/** A text/csv body as UTF-8 bytes, as the text parser made it: another declared charset converted, a BOM dropped, a broken byte as U+FFFD. */
function csvBytes(buf: Buffer, charset: string | null): Buffer {
  let bytes = buf;
  if (charset !== null && charset !== 'utf-8' && charset !== 'utf8' && charset !== 'us-ascii') {
    let decoder: TextDecoder;
    try {
      decoder = new TextDecoder(charset);
    } catch {
      throw unsupportedMediaType(`unsupported charset "${charset.toUpperCase()}"; send the CSV as UTF-8.`);
    }
    bytes = Buffer.from(decoder.decode(buf), 'utf8');
  } else if (!isUtf8(bytes)) {
    // a CSV's other columns are not read; a broken byte there is replaced, as it always was
    bytes = Buffer.from(bytes.toString('utf8'), 'utf8');
  }
  return bytes.subarray(0, 3).equals(BOM) ? bytes.subarray(3) : bytes;
}

/**
 * The body's bytes, copied chunk by chunk into one buffer as they arrive; refused with a 413 past
 * the limit (a chunked body) and a 408 after the deadline. An answer given before the body has
 * ended closes the connection, so the rest of the body is never read.
 */
function receive(req: Request, res: Response, limit: BodyLimit, deadlineMs: number, tooLarge: () => ProblemError): Promise<Buffer> {
  return new Promise((resolve, reject) => {
    const declared = req.headers['content-length'] === undefined ? null : Number(req.headers['content-length']);
    const target = Buffer.allocUnsafe(declared ?? limit.bytes);
    let received = 0;
    const finish = (err: unknown) => {
      clearTimeout(timer);
      req.off('data', onData).off('end', onEnd).off('close', onClose).off('error', onError);
      if (err === null) return resolve(target.subarray(0, received));
      res.setHeader('Connection', 'close');
      reject(err);
    };
    const onData = (chunk: Buffer) => {
      if (received + chunk.length > target.length) return finish(tooLarge());
      chunk.copy(target, received);
      received += chunk.length;
    };
    const onEnd = () => finish(null);
    const onClose = () => finish(Object.assign(new Error('request aborted'), { status: 400, type: 'request.aborted' }));
    const onError = (err: Error) => finish(err);
    const timer = setTimeout(() => {
      finish(new ProblemError(408, 'request-timeout', 'Request timeout', `The body did not arrive within ${deadlineMs} ms (this operation's limit of ${limit.bytes} bytes at the slowest accepted rate, set by LOTPROOF_MIN_BODY_RATE_KB, plus LOTPROOF_HEADERS_TIMEOUT_MS).`));
    }, deadlineMs);
    timer.unref();
    req.on('data', onData).on('end', onEnd).on('close', onClose).on('error', onError);
  });
}

/**
 * The body reader of one operation: refuses a compressed body, a declared length above the limit
 * and a JSON charset other than UTF-8 before reading a byte; reads JSON (checked, then parsed) or
 * CSV (kept as bytes) within the limit and the time; leaves any other media type unread, for the
 * validator to refuse (a 415).
 */
export function readBody(operationId: string, config: Limits): RequestHandler {
  const limit = bodyLimitOf(operationId, config);
  const tooLarge = (size = 'larger than that') => new PayloadTooLargeProblem(`The body is ${size}; the limit of this operation is ${limit.bytes} bytes (set by ${limit.variable}).`);
  const deadlineMs = config.http.headersTimeoutMs + Math.ceil((limit.bytes / config.http.minBodyBytesPerSecond) * 1000);

  return (req, res, next) => {
    if (!hasBody(req)) return next();
    const encoding = String(req.headers['content-encoding'] ?? 'identity').trim().toLowerCase();
    if (encoding !== 'identity' && encoding !== '') {
      return next(new ProblemError(415, 'unsupported-content-encoding', 'Unsupported content encoding', `Content-Encoding: ${encoding} is not accepted: no operation of this API takes a compressed body. Send the body as it is, without a Content-Encoding header.`));
    }
    const declared = Number(req.headers['content-length'] ?? 0);
    if (declared > limit.bytes) return next(tooLarge(`${declared} bytes`));
    const json = Boolean(req.is(JSON_TYPES));
    if (!json && !req.is(CSV_TYPES)) return next();
    const charset = charsetOf(req);
    if (json && charset !== null && charset !== 'utf-8') {
      return next(unsupportedMediaType(`JSON is read as UTF-8 only (RFC 8259); send it with charset=utf-8 or without a charset, not charset=${charset}.`));
    }
    receive(req, res, limit, deadlineMs, tooLarge).then((buf) => {
      try {
        if (json) {
          req.rawBody = buf;
          checkJsonBytes(buf);
          req.body = parseJson(buf);
        } else {
          req.rawBody = csvBytes(buf, charset);
          req.body = '';
        }
      } catch (err) {
        return next(err);
      }
      next();
    }, next);
  };
}
