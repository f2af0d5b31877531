// RFC 8785 JSON Canonicalization Scheme (JCS), the form every seal is computed over.
//
// `canonicalize` (npm, maintained by an RFC 8785 author) is the reference; this module adds one
// fast path it lacks: an array made only of finite numbers (a lot's measurements) is written by
// `numberArrayJson`, which gives exactly what JSON.stringify gives — and JSON.stringify of a
// finite number is RFC 8785's form for it (ECMAScript Number serialisation, §3.2.2.3; -0 becomes
// 0). tests/integration/ledger.test.ts and tests/unit/canonical-numbers.test.ts check they agree.
import canonicalizeReference from 'canonicalize';

export class CanonicalisationError extends Error {}

let scratch = Buffer.allocUnsafe(1 << 16);
const digits = new Uint8Array(24);

// Lookup tables for the digits of 0…999: INT[4·i…] is the length then the digits of i (no
// leading zeros); FRAC[4·f…] is the count then the decimals of f/1000 without trailing zeros
// (count 0 for f = 0).
const INT = new Uint8Array(4000);
const FRAC = new Uint8Array(4000);
for (let i = 0; i < 1000; i++) {
  const s = String(i);
  INT[4 * i] = s.length;
  for (let j = 0; j < s.length; j++) INT[4 * i + 1 + j] = s.charCodeAt(j);
  const f = i === 0 ? '' : String(i).padStart(3, '0').replace(/0+$/, '');
  FRAC[4 * i] = f.length;
  for (let j = 0; j < f.length; j++) FRAC[4 * i + 1 + j] = f.charCodeAt(j);
}

/**
 * JSON.stringify(a) for an array of finite numbers, several times faster for measurements
 * with up to three decimals (JSON.stringify of a million such doubles takes longer than parsing
 * them). Why it is the same text: let k = Math.round(v·1000). When |k| < 10^15 and k / 1000 === v,
 * v is the double nearest to the decimal D = k/1000 (k and 1000 are exact, and IEEE division
 * rounds correctly), and D has at most 15 significant digits. Distinct decimals of at most 15
 * significant digits never share a double, so D (without trailing zeros) is the one shortest
 * digit string that reads back as v — which is what ECMAScript's Number::toString prints, in
 * plain notation because 0.001 ≤ |v| < 10^12 (or v = 0; -0 prints as 0 in both). Every other
 * value is written by JSON.stringify itself.
 */
export function numberArrayJson(a: ArrayLike<number>): string {
  const b = numberArrayJsonOrNull(a);
  // not only finite numbers: JSON.stringify's text (null for a non-finite number)
  return b ? b.toString('latin1') : JSON.stringify(Array.from(a));
}

/** The bytes of numberArrayJson(a) (ASCII), in a buffer of their own; null when a holds anything
 *  but finite numbers. */
export function numberArrayJsonOrNull(a: ArrayLike<unknown>): Buffer | null {
  const n = a.length;
  // Typical measurements (up to 3 integer digits and 3 decimals, and a comma) need 8 bytes each.
  let buf = scratch.length >= 8 * n + 64 ? scratch : (scratch = Buffer.allocUnsafe(8 * n + 64));
  let p = 0;
  buf[p++] = 0x5b; // [
  for (let i = 0; i < n; i++) {
    if (p + 40 > buf.length) {
      const bigger = Buffer.allocUnsafe(buf.length * 2);
      buf.copy(bigger, 0, 0, p);
      buf = scratch = bigger;
    }
    if (i > 0) buf[p++] = 0x2c; // ,
    const v = a[i] as number;
    const k = Math.round(v * 1000);
    if (k / 1000 === v && k < 1e15 && k > -1e15) {
      let ak = k;
      if (k < 0) {
        ak = -k;
        buf[p++] = 0x2d; // -
      }
      let ip = Math.floor(ak / 1000);
      const fr = ak - ip * 1000;
      if (ip < 1000) {
        const o = 4 * ip;
        const len = INT[o]!;
        buf[p] = INT[o + 1]!;
        if (len > 1) buf[p + 1] = INT[o + 2]!;
        if (len > 2) buf[p + 2] = INT[o + 3]!;
        p += len;
      } else {
        let t = 0;
        do {
          const q = Math.floor(ip / 10);
          digits[t++] = 0x30 + (ip - q * 10);
          ip = q;
        } while (ip > 0);
        while (t > 0) buf[p++] = digits[--t]!;
      }
      const f = 4 * fr;
      const flen = FRAC[f]!;
      if (flen > 0) {
        buf[p] = 0x2e; // .
        buf[p + 1] = FRAC[f + 1]!;
        if (flen > 1) buf[p + 2] = FRAC[f + 2]!;
        if (flen > 2) buf[p + 3] = FRAC[f + 3]!;
        p += flen + 1;
      }
    } else {
      // (the fast path above takes only numbers: k / 1000 === v is false for anything else)
      if (typeof v !== 'number' || !Number.isFinite(v)) return null;
      p += buf.write(JSON.stringify(v), p, 'latin1');
    }
  }
  buf[p++] = 0x5d; // ]
  let out: Buffer;
  if (buf.length > 1 << 20) {
    // A big buffer is handed over (the bytes are not copied) and not kept for the next call.
    out = buf.subarray(0, p);
    scratch = Buffer.allocUnsafe(1 << 16);
  } else {
    out = Buffer.from(buf.subarray(0, p));
  }
  return out;
}

const SURROGATE = /[\uD800-\uDFFF]/;

/** Pieces of canonical text: strings, and the ASCII bytes of number arrays. */
type Piece = string | Buffer;

/** Canonical bytes already written for some arrays of a value (by identity), e.g. by a worker thread. */
export type KnownArrays = ReadonlyMap<unknown, Buffer>;
const NONE: KnownArrays = new Map();

function walk(value: unknown, out: Piece[], known: KnownArrays): void {
  if (value === null || typeof value !== 'object') {
    if (typeof value === 'number' && !Number.isFinite(value)) throw new CanonicalisationError('a number in the record is not finite');
    if (value === undefined || typeof value === 'function' || typeof value === 'symbol') {
      throw new CanonicalisationError('the record holds a value JSON cannot represent');
    }
    if (typeof value === 'string') {
      // Without surrogates JSON.stringify is the RFC 8785 form of a string (what the reference
      // returns); the reference itself checks for lone surrogates and refuses them.
      if (!SURROGATE.test(value)) {
        out.push(JSON.stringify(value));
        return;
      }
      const s = canonicalizeReference(value);
      if (s === undefined) throw new CanonicalisationError('a string in the record cannot be canonicalised');
      out.push(s);
      return;
    }
    out.push(JSON.stringify(value));
    return;
  }
  if (Array.isArray(value)) {
    const numbers = value.length > 8 ? (known.get(value) ?? numberArrayJsonOrNull(value)) : null;
    if (numbers !== null) {
      out.push(numbers);
      return;
    }
    out.push('[');
    for (let i = 0; i < value.length; i++) {
      if (i > 0) out.push(',');
      walk(value[i] === undefined ? null : value[i], out, known);
    }
    out.push(']');
    return;
  }
  if (typeof (value as { toJSON?: unknown }).toJSON === 'function') {
    walk((value as { toJSON: () => unknown }).toJSON(), out, known);
    return;
  }
  const obj = value as Record<string, unknown>;
  // RFC 8785 §3.2.3: properties sorted by their names as arrays of UTF-16 code units, which is
  // what the default string comparison of Array.prototype.sort does.
  const keys = Object.keys(obj).filter((k) => obj[k] !== undefined).sort();
  out.push('{');
  keys.forEach((k, i) => {
    if (i > 0) out.push(',');
    walk(k, out, known);
    out.push(':');
    walk(obj[k], out, known);
  });
  out.push('}');
}

/** The RFC 8785 canonical JSON text of a JSON value. */
export function canonicalJson(value: unknown): string {
  const out: Piece[] = [];
  walk(value, out, NONE);
  // A big piece (a lot's measurements) is concatenated, not copied again by join.
  let s = '';
  let from = 0;
  for (let i = 0; i < out.length; i++) {
    const piece = out[i]!;
    if (typeof piece !== 'string') {
      s += out.slice(from, i).join('') + piece.toString('latin1');
      from = i + 1;
    }
  }
  return from === 0 ? out.join('') : s + out.slice(from).join('');
}

/**
 * The UTF-8 bytes of canonicalJson(value), built without first making the whole text: a lot's
 * measurements go from the number writer's bytes straight into the result, and the text around
 * them is encoded once. (A text holding one non-Latin-1 character is stored by V8 at two bytes
 * per character; a 7 MB lot would be widened to 14 MB and encoded again for every use.)
 * `known` holds the bytes of number arrays written beforehand (canonical-aside.ts); they must be
 * what numberArrayJsonOrNull gives for those arrays.
 */
export function canonicalJsonBytes(value: unknown, known: KnownArrays = NONE): Buffer {
  const out: Piece[] = [];
  walk(value, out, known);
  return joinPieces(out);
}

/** Concatenates text (UTF-8 encoded, adjacent strings together) and byte pieces. */
export function joinPieces(pieces: readonly Piece[]): Buffer {
  const chunks: Buffer[] = [];
  let text: string[] = [];
  for (const piece of pieces) {
    if (typeof piece === 'string') {
      text.push(piece);
      continue;
    }
    if (text.length > 0) chunks.push(Buffer.from(text.join(''), 'utf8'));
    text = [];
    chunks.push(piece);
  }
  if (text.length > 0) chunks.push(Buffer.from(text.join(''), 'utf8'));
  return chunks.length === 1 ? chunks[0]! : Buffer.concat(chunks);
}

/** The reference implementation, for tests and for small values where speed does not matter. */
export function canonicalJsonReference(value: unknown): string {
  const s = canonicalizeReference(value);
  if (s === undefined) throw new CanonicalisationError('value cannot be canonicalised');
  return s;
}
