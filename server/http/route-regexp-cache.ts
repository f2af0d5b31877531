// express-openapi-validator matches every API request by compiling path-to-regexp for each route
// of the document in turn (openapi.metadata.js, lookupRoute), on every request: with our few dozen
// routes that was a visible share of the CPU per request. The compiled result depends only on the
// route and two flags, so this wraps the module's pathToRegexp (the instance the validator
// requires, looked up through the validator's own resolution) with a memo. The regular
// expressions are not global, so sharing one between calls is safe (exec keeps no state).
import { createRequire } from 'node:module';

type PathToRegexp = (path: unknown, options?: Record<string, unknown>) => unknown;
const MARK = Symbol.for('lotproof.pathToRegexp.memo');

export function memoiseValidatorRouteRegexps(): void {
  const fromValidator = createRequire(createRequire(import.meta.url).resolve('express-openapi-validator'));
  const mod = fromValidator('path-to-regexp') as { pathToRegexp: PathToRegexp & { [MARK]?: true } };
  if (mod.pathToRegexp[MARK]) return;
  const original = mod.pathToRegexp;
  const memo = new Map<string, unknown>();
  const wrapped = ((path: unknown, options?: Record<string, unknown>) => {
    const simple = typeof path === 'string' && (!options || Object.keys(options).every((k) => k === 'sensitive' || k === 'strict'));
    if (!simple || memo.size > 10_000) return original(path, options);
    const key = `${options?.sensitive ? 1 : 0}${options?.strict ? 1 : 0}${path}`;
    let r = memo.get(key);
    if (r === undefined) memo.set(key, (r = original(path, options)));
    return r;
  }) as PathToRegexp & { [MARK]?: true };
  wrapped[MARK] = true;
  mod.pathToRegexp = wrapped;
}
