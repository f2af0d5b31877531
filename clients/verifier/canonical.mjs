// RFC 8785 JSON Canonicalization Scheme, and strict base64url: the only encodings the verifier needs.

/** RFC 8785 canonical JSON of a parsed value. */
export function canonicalize(value) {
  if (value === null || typeof value === 'boolean') return JSON.stringify(value);
  if (typeof value === 'number') {
    if (!Number.isFinite(value)) throw new Error('non-finite number');
    return JSON.stringify(value); // ECMAScript number serialisation (RFC 8785 §3.2.2.3); -0 → 0
  }
  if (typeof value === 'string') {
    for (let i = 0; i < value.length; i++) {
      const c = value.charCodeAt(i);
      if (c >= 0xd800 && c <= 0xdbff) {
        const d = value.charCodeAt(i + 1);
        if (!(d >= 0xdc00 && d <= 0xdfff)) throw new Error('lone surrogate');
        i++;
      } else if (c >= 0xdc00 && c <= 0xdfff) throw new Error('lone surrogate');
    }
    return JSON.stringify(value);
  }
  if (Array.isArray(value)) return `[${value.map(canonicalize).join(',')}]`;
  if (typeof value === 'object') {
    // Property names sorted as arrays of UTF-16 code units (the default string sort).
    const keys = Object.keys(value).sort();
    return `{${keys.map((k) => `${canonicalize(k)}:${canonicalize(value[k])}`).join(',')}}`;
  }
  throw new Error(`unsupported value of type ${typeof value}`);
}

/** Strict base64url: decoding and re-encoding must give back the same text; null otherwise. */
export function base64url(text) {
  if (typeof text !== 'string' || !/^[A-Za-z0-9_-]*$/.test(text)) return null;
  const bytes = Buffer.from(text, 'base64url');
  return bytes.toString('base64url') === text ? bytes : null;
}

/** 64 lower-case hex digits, as every hash is written (FORMAT.md). */
export const isHash = (v) => typeof v === 'string' && /^[0-9a-f]{64}$/.test(v);

/** A plain JSON object (not null, not an array). */
export const isObject = (v) => v !== null && typeof v === 'object' && !Array.isArray(v);
