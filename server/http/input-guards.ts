// Values the OpenAPI validator accepts but nothing behind it can take, refused as 400 problems that
// name the field, right after validation and before any handler:
//   - a string holding U+0000 (PostgreSQL's text cannot store it) or a lone UTF-16 surrogate (not
//     Unicode, so it has no UTF-8 form to store or to seal);
//   - a number that is not finite: the validator coerces a query value such as "1e999" to Infinity
//     and its integer, minimum and maximum checks let it through;
//   - a JSON value nested deeper than MAX_DEPTH (no request of this API needs more than a few levels;
//     a walk over thousands would exhaust the stack): found on a body's bytes before JSON.parse
//     (`tooDeepAt`, called by request-body.ts), so a deep body is never parsed; the walk below
//     keeps the bound too.
// And two formats made stricter for the validator itself (`storableFormats`): an RFC 3339
// date-time or date that JavaScript can read and PostgreSQL can store — years 0001 to 9999, a
// calendar day that exists, no leap second (ajv-formats accepts year 0000 and second 60).
// A JSON body is only walked when its raw text holds a \u escape that could be one of these, so a
// lot of a million numbers costs one scan of its bytes.
import type { RequestHandler } from 'express';
import { ValidationProblem } from './problem';

/** How deep a JSON body may nest (a lot nests two levels; a product's rulebook parameters a few more). */
export const MAX_DEPTH = 64;

/** A `\u0000` or a `\uD800`–`\uDFFF` escape, in any letter case. */
const SUSPECT_ESCAPE = /\\u(0000|d[89a-f][0-9a-f]{2})/i;

/** True when the text holds at most `limit` opening brackets (found by native search: a lot's body has two). */
function fewBrackets(text: Buffer, limit: number): boolean {
  let n = 0;
  for (const bracket of [0x5b, 0x7b]) {
    for (let i = text.indexOf(bracket); i >= 0; i = text.indexOf(bracket, i + 1)) if (++n > limit) return false;
  }
  return true;
}

/**
 * Offset of the bracket at which a JSON text first nests deeper than `max` levels, counted over its
 * brackets outside strings (no parse, no recursion, stopped there); -1 when it never does.
 */
function tooDeepOffset(text: Buffer, max: number): number {
  let depth = 0;
  let inString = false;
  for (let i = 0; i < text.length; i++) {
    const c = text[i]!;
    if (inString) {
      if (c === 0x5c) i++; // backslash: skip the escaped character
      else if (c === 0x22) inString = false;
    } else if (c === 0x22) inString = true;
    else if (c === 0x5b || c === 0x7b) {
      if (++depth > max) return i;
    } else if (c === 0x5d || c === 0x7d) depth--;
  }
  return -1;
}

/**
 * The JSON pointer (under `base`) of the value that opens at `offset`: the text before it walked
 * once more, keeping each open array's index and each open object's latest key. The text need
 * not be valid JSON; JSON.parse judges it once it has passed.
 */
function pointerAt(text: Buffer, offset: number, base: string): string {
  const frames: { array: boolean; at: string; expectKey: boolean }[] = [];
  let keyStart = -1;
  for (let i = 0; i < offset; i++) {
    const c = text[i]!;
    const top = frames[frames.length - 1];
    if (keyStart >= 0) {
      if (c === 0x5c) i++;
      else if (c === 0x22) {
        if (top && !top.array && top.expectKey) {
          const raw = text.toString('utf8', keyStart, i + 1);
          try {
            top.at = String(JSON.parse(raw));
          } catch {
            top.at = raw.slice(1, -1);
          }
          top.expectKey = false;
        }
        keyStart = -1;
      }
    } else if (c === 0x22) keyStart = i;
    else if (c === 0x5b) frames.push({ array: true, at: '0', expectKey: false });
    else if (c === 0x7b) frames.push({ array: false, at: '', expectKey: true });
    else if (c === 0x5d || c === 0x7d) frames.pop();
    else if (c === 0x2c && top) {
      if (top.array) top.at = String(Number(top.at) + 1);
      else top.expectKey = true;
    }
  }
  return base + frames.map((f) => `/${escapePointer(f.at)}`).join('');
}

/**
 * Where a JSON text nests deeper than MAX_DEPTH, as the pointer of the value that goes too deep,
 * found on its bytes before any parse; null when it does not. A text with few brackets (a lot's
 * body has two) is passed after a few native searches; only one with more is walked byte by byte.
 */
export function tooDeepAt(text: Buffer, max = MAX_DEPTH, base = '/body'): string | null {
  if (fewBrackets(text, max)) return null;
  const offset = tooDeepOffset(text, max);
  return offset < 0 ? null : pointerAt(text, offset, base);
}

function escapePointer(key: string): string {
  return key.replace(/~/g, '~0').replace(/\//g, '~1');
}

/** The first value under `value` that is refused, with its JSON pointer and what is wrong with it. */
function firstRefused(value: unknown, pointer: string, depth = 0): { pointer: string; detail: string } | null {
  if (depth > MAX_DEPTH) return { pointer, detail: `is nested deeper than ${MAX_DEPTH} levels` };
  if (typeof value === 'string') {
    if (value.includes('\u0000')) return { pointer, detail: 'must not contain the NUL character (U+0000)' };
    if (!(value as string & { isWellFormed(): boolean }).isWellFormed()) return { pointer, detail: 'must be well-formed Unicode (it holds a lone surrogate)' };
    return null;
  }
  if (typeof value === 'number') return Number.isFinite(value) ? null : { pointer, detail: 'must be a finite number' };
  if (Array.isArray(value)) {
    for (let i = 0; i < value.length; i++) {
      const v = value[i];
      if (typeof v === 'number' && Number.isFinite(v)) continue;
      const bad = firstRefused(v, `${pointer}/${i}`, depth + 1);
      if (bad) return bad;
    }
    return null;
  }
  if (value && typeof value === 'object') {
    for (const [k, v] of Object.entries(value)) {
      const bad = firstRefused(k, `${pointer}/${escapePointer(k)}`) ?? firstRefused(v, `${pointer}/${escapePointer(k)}`, depth + 1);
      if (bad) return bad;
    }
  }
  return null;
}

export const inputGuards: RequestHandler = (req, _res, next) => {
  const raw = req.rawBody;
  // Numbers hold no "\u": most bodies, a big lot's too, are passed over after one native search
  // of their bytes. (Nesting was checked on the bytes before parsing: request-body.ts, tooDeepAt.)
  const suspect = raw === undefined || (raw.indexOf('\\u') >= 0 && SUSPECT_ESCAPE.test(raw.toString('latin1')));
  const body = typeof req.body === 'string' || !suspect ? null : req.body;
  // (path parameters are checked by the validator's formats and patterns; at this point, before
  // routing, req.params is still empty)
  const bad = firstRefused(req.query, '/query') ?? (body != null ? firstRefused(body, '/body') : null);
  if (!bad) return next();
  next(new ValidationProblem(`${bad.pointer}: ${bad.detail}`, [bad]));
};

const DATE = /^(\d{4})-(\d{2})-(\d{2})$/;
const DATE_TIME = /^(\d{4}-\d{2}-\d{2})[Tt](\d{2}):(\d{2}):(\d{2})(\.\d+)?([Zz]|[+-](\d{2}):(\d{2}))$/;

function storableDate(s: string): boolean {
  const m = DATE.exec(s);
  if (!m) return false;
  const [y, mo, d] = [Number(m[1]), Number(m[2]), Number(m[3])];
  const day = new Date(Date.UTC(2000, mo - 1, d));
  day.setUTCFullYear(y);
  // the day exists (Date.UTC would roll 2026-02-30 over into March)
  return y >= 1 && day.getUTCFullYear() === y && day.getUTCMonth() === mo - 1 && day.getUTCDate() === d;
}

function storableDateTime(s: string): boolean {
  const m = DATE_TIME.exec(s);
  if (!m || !storableDate(m[1]!)) return false;
  if (Number(m[2]) > 23 || Number(m[3]) > 59 || Number(m[4]) > 59) return false;
  if (m[7] !== undefined && (Number(m[7]) > 23 || Number(m[8]) > 59)) return false;
  const year = new Date(s).getUTCFullYear();
  return year >= 1 && year <= 9999;
}

/** For the OpenAPI validator's `formats` option: date and date-time as this API can store them. */
export const storableFormats = {
  date: { type: 'string' as const, validate: storableDate },
  'date-time': { type: 'string' as const, validate: storableDateTime },
};
