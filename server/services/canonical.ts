// RFC 8785 JSON Canonicalization Scheme (JCS), the form every seal is computed over.
//
// `canonicalize` (npm, maintained by an RFC 8785 author) is the reference; this module adds one
// fast path it lacks: an array made only of finite numbers is serialised with a single
// JSON.stringify, which is exactly RFC 8785's form for it (ECMAScript Number serialisation,
// RFC 8785 §3.2.2.3, is what JSON.stringify uses; -0 becomes 0 in both). A lot of a million
// measurements canonicalises several times faster that way. tests/integration/ledger.test.ts
// checks the two agree.
import canonicalizeReference from 'canonicalize';

export class CanonicalisationError extends Error {}

function allFiniteNumbers(a: unknown[]): boolean {
  for (let i = 0; i < a.length; i++) {
    const v = a[i];
    if (typeof v !== 'number' || !Number.isFinite(v)) return false;
  }
  return true;
}

function walk(value: unknown, out: string[]): void {
  if (value === null || typeof value !== 'object') {
    if (typeof value === 'number' && !Number.isFinite(value)) throw new CanonicalisationError('a number in the record is not finite');
    if (value === undefined || typeof value === 'function' || typeof value === 'symbol') {
      throw new CanonicalisationError('the record holds a value JSON cannot represent');
    }
    if (typeof value === 'string') {
      const s = canonicalizeReference(value);
      if (s === undefined) throw new CanonicalisationError('a string in the record cannot be canonicalised');
      out.push(s);
      return;
    }
    out.push(JSON.stringify(value));
    return;
  }
  if (Array.isArray(value)) {
    if (value.length > 64 && allFiniteNumbers(value)) {
      out.push(JSON.stringify(value));
      return;
    }
    out.push('[');
    for (let i = 0; i < value.length; i++) {
      if (i > 0) out.push(',');
      walk(value[i] === undefined ? null : value[i], out);
    }
    out.push(']');
    return;
  }
  if (typeof (value as { toJSON?: unknown }).toJSON === 'function') {
    walk((value as { toJSON: () => unknown }).toJSON(), out);
    return;
  }
  const obj = value as Record<string, unknown>;
  // RFC 8785 §3.2.3: properties sorted by their names as arrays of UTF-16 code units, which is
  // what the default string comparison of Array.prototype.sort does.
  const keys = Object.keys(obj).filter((k) => obj[k] !== undefined).sort();
  out.push('{');
  keys.forEach((k, i) => {
    if (i > 0) out.push(',');
    walk(k, out);
    out.push(':');
    walk(obj[k], out);
  });
  out.push('}');
}

/** The RFC 8785 canonical JSON text of a JSON value. */
export function canonicalJson(value: unknown): string {
  const out: string[] = [];
  walk(value, out);
  return out.join('');
}

/** The reference implementation, for tests and for small values where speed does not matter. */
export function canonicalJsonReference(value: unknown): string {
  const s = canonicalizeReference(value);
  if (s === undefined) throw new CanonicalisationError('value cannot be canonicalised');
  return s;
}
