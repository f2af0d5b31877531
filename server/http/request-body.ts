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
//   - a big JSON body (JSON_ASIDE_MIN_BYTES and more) whose schema declares arrays of numbers (a
//     lot) parsed on the aside thread, its number arrays checked there and handed back as
//     Float64Arrays (`numberArraysSetAside`), so the event loop never holds a million-value parse
//     (http/json-number-arrays.ts says how every rule of the schema is still enforced);
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
import { loadApiDocument } from '../../openapi/load';
import type { Config } from '../config';
import { runAside } from '../core/aside-thread';
import { tooDeepAt, MAX_DEPTH } from './input-guards';
import { numberArrayRules, parseJsonSettingAside, parseJsonText, type NumberArrayRule } from './json-number-arrays';
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

const notJson = (message: string) => Object.assign(new SyntaxError(message), { status: 400, type: 'entity.parse.failed' });

/** A JSON body's value, as body-parser's strict parser gave it (an empty body is {}); its errors read as body-parser's did. */
function parseJson(buf: Buffer): unknown {
  const parsed = parseJsonText(buf);
  if (!parsed.ok) throw notJson(parsed.message);
  return parsed.value;
}

/**
 * A JSON body this big or bigger is parsed on the aside thread when its operation's schema
 * declares arrays of numbers. JSON.parse costs about 25 ms per MiB of a lot here (a
 * 1 000 000-measurement lot of 6.6 MiB: 150–250 ms); below this (some 35 000 measurements) it stays
 * within a few ms, less than sending the bytes there and back would cost.
 */
export const JSON_ASIDE_MIN_BYTES = 256 * 1024;

/** The number arrays each operation's JSON body declares (from the OpenAPI document), read once. */
let rulesByOperation: Map<string, NumberArrayRule[]> | null = null;
function rulesOf(operationId: string): NumberArrayRule[] {
  if (!rulesByOperation) {
    const doc = loadApiDocument() as { paths?: Record<string, Record<string, any>>; components?: { schemas?: Record<string, Record<string, unknown>> } };
    const schemas = doc.components?.schemas ?? {};
    const resolve = (ref: string) => (ref.startsWith('#/components/schemas/') ? schemas[ref.slice('#/components/schemas/'.length)] : undefined);
    rulesByOperation = new Map();
    for (const item of Object.values(doc.paths ?? {})) {
      for (const op of Object.values(item)) {
        if (typeof op?.operationId !== 'string') continue;
        rulesByOperation.set(op.operationId, numberArrayRules(op.requestBody?.content?.['application/json']?.schema, resolve));
      }
    }
  }
  return rulesByOperation.get(operationId) ?? [];
}

/** The number arrays taken out of a request's JSON body on the aside thread, by property name. */
const setAside = new WeakMap<Request, Record<string, Float64Array>>();

/**
 * The arrays of numbers the aside thread took out of this request's JSON body (each left in
 * `req.body` as []), checked against the schema's rules for them; undefined when none was.
 */
export function numberArraysSetAside(req: Request): Readonly<Record<string, Float64Array>> | undefined {
  return setAside.get(req);
}

/** Parses a big JSON body on the aside thread (a copy of its bytes goes there: `rawBody` stays here). */
async function parseAside(req: Request, buf: Buffer, rules: NumberArrayRule[]): Promise<void> {
  // Bytes in shared memory are read there in place; others are copied, as `rawBody` stays here.
  const bytes = buf.buffer instanceof SharedArrayBuffer ? buf : new Uint8Array(buf);
  const { parsed, numbers } = await runAside(parseJsonSettingAside, { bytes, rules }, bytes === buf ? [] : [bytes.buffer as ArrayBuffer]);
  if (!parsed.ok) throw notJson(parsed.message);
  req.body = parsed.value;
  if (Object.keys(numbers).length > 0) setAside.set(req, numbers);
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
function receive(req: Request, res: Response, limit: BodyLimit, deadlineMs: number, tooLarge: () => ProblemError, shared: boolean): Promise<Buffer> {
  return new Promise((resolve, reject) => {
    const declared = req.headers['content-length'] === undefined ? null : Number(req.headers['content-length']);
    // (shared memory for a body the aside thread will parse: it reads the bytes where they are; a
    // copy of a 7 MB body into fresh memory held the event loop for 25–40 ms on the test machine)
    const size = declared ?? limit.bytes;
    const target = shared ? Buffer.from(new SharedArrayBuffer(size)) : Buffer.allocUnsafe(size);
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
  const asideRules = rulesOf(operationId);

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
    const aside = json && asideRules.length > 0 && !(declared > 0 && declared < JSON_ASIDE_MIN_BYTES) && Boolean(req.is('application/json'));
    receive(req, res, limit, deadlineMs, tooLarge, aside).then((buf) => {
      try {
        if (json) {
          req.rawBody = buf;
          checkJsonBytes(buf);
          if (aside && buf.length >= JSON_ASIDE_MIN_BYTES) {
            parseAside(req, buf, asideRules).then(() => next(), next);
            return;
          }
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
