// RFC 8785 JSON Canonicalization Scheme (JCS), the form every seal is computed over.
//
// `canonicalize` (npm, maintained by an RFC 8785 author) is the reference; an array made only of
// finite numbers (a lot's measurements) is written by the hand-written number writer of
// canonical-numbers.speedup.ts, which gives exactly the reference's text for it.
// tests/integration/ledger.test.ts and tests/unit/canonical-numbers.test.ts check they agree.
import canonicalizeReference from 'canonicalize';
import { numberArrayJsonOrNull } from './canonical-numbers.speedup';

export class CanonicalisationError extends Error {}

const SURROGATE = /[\uD800-\uDFFF]/;

/** Pieces of canonical text: strings, and the ASCII bytes of number arrays. */
type Piece = string | Buffer;

function walk(value: unknown, out: Piece[]): void {
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
    const numbers = value.length > 8 ? numberArrayJsonOrNull(value) : null;
    if (numbers !== null) {
      out.push(numbers);
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
  const out: Piece[] = [];
  walk(value, out);
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
 */
export function canonicalJsonBytes(value: unknown): Buffer {
  const out: Piece[] = [];
  walk(value, out);
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
