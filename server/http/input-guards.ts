// Values the OpenAPI validator accepts but nothing behind it can take, refused as 400 problems that
// name the field, right after validation and before any handler:
//   - a string holding U+0000 (PostgreSQL's text cannot store it) or a lone UTF-16 surrogate (not
//     Unicode, so it has no UTF-8 form to store or to seal);
//   - a number that is not finite: the validator coerces a query value such as "1e999" to Infinity
//     and its integer, minimum and maximum checks let it through.
// A JSON body is only walked when its raw text holds a \u escape that could be one of these, so a
// lot of a million numbers costs one scan of its bytes.
import type { RequestHandler } from 'express';
import { ValidationProblem } from './problem';

/** A `\u0000` or a `\uD800`–`\uDFFF` escape, in any letter case. */
const SUSPECT_ESCAPE = /\\u(0000|d[89a-f][0-9a-f]{2})/i;

function escapePointer(key: string): string {
  return key.replace(/~/g, '~0').replace(/\//g, '~1');
}

/** The first value under `value` that is refused, with its JSON pointer and what is wrong with it. */
function firstRefused(value: unknown, pointer: string): { pointer: string; detail: string } | null {
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
      const bad = firstRefused(v, `${pointer}/${i}`);
      if (bad) return bad;
    }
    return null;
  }
  if (value && typeof value === 'object') {
    for (const [k, v] of Object.entries(value)) {
      const bad = firstRefused(k, `${pointer}/${escapePointer(k)}`) ?? firstRefused(v, `${pointer}/${escapePointer(k)}`);
      if (bad) return bad;
    }
  }
  return null;
}

export const inputGuards: RequestHandler = (req, _res, next) => {
  const raw = req.rawBody;
  // Numbers never hold "\u": most bodies are passed over after one native search of their bytes.
  const suspect = raw === undefined || (raw.indexOf('\\u') >= 0 && SUSPECT_ESCAPE.test(raw.toString('latin1')));
  const body = typeof req.body === 'string' || !suspect ? null : req.body;
  const bad = firstRefused(req.query, '/query') ?? firstRefused(req.params, '/path') ?? (body != null ? firstRefused(body, '/body') : null);
  if (!bad) return next();
  next(new ValidationProblem(`${bad.pointer}: ${bad.detail}`, [bad]));
};
