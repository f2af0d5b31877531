// Structured logs with pino. Credentials are redacted wherever they could appear, and no logged
// error carries SQL text, bind values or row data (see scrubError).
import { pino, stdSerializers, type Logger } from 'pino';

export const REDACT_PATHS = [
  'req.headers.authorization',
  'req.headers.cookie',
  'res.headers["set-cookie"]',
  '*.password',
  '*.secret',
  '*.token',
  '*.apiKey',
];

/**
 * Members of an error that hold SQL text, bind values or a row's content: Sequelize's `sql`,
 * `parameters`, `fields`, a validation item's `value` and `instance`; node-postgres's `detail`
 * ("Key (sku)=(…)"), `where`, `internalQuery`, `hint`. Never logged, at any depth.
 */
const DROPPED = new Set([
  'sql', 'parameters', 'bind', 'replacements', 'values', 'value', 'instance', 'fields', 'original', 'parent',
  'detail', 'where', 'internalQuery', 'internalPosition', 'position', 'hint', 'query', 'validatorArgs', 'fnArgs', 'raw',
]);
/** What is kept of the database error under a Sequelize error: what failed, never with what. */
const DATABASE_FACTS = ['name', 'code', 'severity', 'routine', 'constraint', 'table', 'column', 'dataType', 'schema'] as const;
const MAX_DEPTH = 4;

type Bag = Record<string, unknown>;

function isErrorLike(v: unknown): v is Bag & { message: string } {
  return typeof v === 'object' && v !== null && typeof (v as Bag).message === 'string';
}

/** True for an error of Sequelize or node-postgres, whose message may quote a value. */
function fromDatabase(e: Bag): boolean {
  return (
    (typeof e.name === 'string' && e.name.startsWith('Sequelize')) ||
    'sql' in e ||
    'parameters' in e ||
    (typeof e.severity === 'string' && typeof e.code === 'string' && /^[0-9A-Z]{5}$/.test(e.code))
  );
}

/** PostgreSQL quotes the value it refused ('invalid input syntax for type uuid: "…"'): the quotes stay, the text goes. */
function withoutQuoted(text: string): string {
  return text.replace(/"(?:[^"\\\n]|\\.)*"/g, '"…"').replace(/'(?:[^'\n]|'')*'/g, "'…'");
}

function scrubValue(v: unknown, depth: number, seen: Map<object, unknown>): unknown {
  if (typeof v !== 'object' || v === null) return v;
  if (seen.has(v)) return seen.get(v);
  if (depth > MAX_DEPTH) return '[…]';
  if (isErrorLike(v)) return scrubError(v, depth, seen);
  if (Array.isArray(v)) return v.map((x) => scrubValue(x, depth + 1, seen));
  const out: Bag = {};
  seen.set(v, out);
  for (const [k, x] of Object.entries(v)) if (!DROPPED.has(k)) out[k] = scrubValue(x, depth + 1, seen);
  return out;
}

/**
 * A copy of an error fit for a log line: same prototype (so its type still reads), message and
 * stack without quoted values when it comes from the database, none of the DROPPED members, its
 * cause and the errors it aggregates scrubbed alike; of the database error underneath a Sequelize
 * error only what failed (SQLSTATE, constraint, table). The error itself is left as it was.
 * Own code: pino's and pino-std-serializers' options only redact fixed paths, and these members
 * sit at any depth under any key.
 */
export function scrubError<E>(err: E, depth = 0, seen = new Map<object, unknown>()): E {
  if (!isErrorLike(err)) return err;
  if (seen.has(err)) return seen.get(err) as E;
  const db = fromDatabase(err);
  const copy = Object.create(Object.getPrototypeOf(err) as object | null) as Bag;
  seen.set(err, copy);
  const clean = (s: unknown) => (typeof s === 'string' && db ? withoutQuoted(s) : s);
  copy.message = clean(err.message);
  if (typeof err.stack === 'string') copy.stack = clean(err.stack);
  for (const [k, v] of Object.entries(err)) {
    if (DROPPED.has(k) || k === 'message' || k === 'stack') continue;
    copy[k] = typeof v === 'string' ? clean(v) : scrubValue(v, depth + 1, seen);
  }
  if (err.cause !== undefined) copy.cause = scrubValue(err.cause, depth + 1, seen);
  const under = (err.original ?? err.parent) as Bag | undefined;
  if (under && typeof under === 'object') {
    const facts: Bag = {};
    for (const k of DATABASE_FACTS) if (typeof under[k] === 'string') facts[k] = k === 'name' ? under[k] : clean(under[k]);
    if (Object.keys(facts).length > 0) copy.database = facts;
  }
  return copy as E;
}

/** The `err` serializer: pino's standard one, of the scrubbed error. */
function errSerializer(err: unknown): unknown {
  return stdSerializers.err(scrubError(err) as Error);
}

export function createLogger(level: string, destination?: NodeJS.WritableStream): Logger {
  return pino(
    {
      level,
      redact: { paths: REDACT_PATHS, censor: '[redacted]' },
      base: { service: 'lotproof' },
      serializers: { err: errSerializer },
      hooks: {
        // Child loggers may bring their own `err` serializer (pino-http sets pino's standard one on
        // the request logger), so errors are scrubbed before any serializer sees them: an error
        // logged by itself, or any error-valued member of the object logged.
        logMethod(args, method) {
          const [first] = args as unknown[];
          if (first instanceof Error) {
            (args as unknown[])[0] = scrubError(first);
          } else if (typeof first === 'object' && first !== null) {
            let copy: Bag | null = null;
            for (const [k, v] of Object.entries(first)) {
              if (v instanceof Error || (k === 'err' && isErrorLike(v))) {
                copy ??= { ...(first as Bag) };
                copy[k] = scrubError(v);
              }
            }
            if (copy) (args as unknown[])[0] = copy;
          }
          return method.apply(this, args);
        },
      },
    },
    destination as any,
  );
}
