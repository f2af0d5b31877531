// Opaque cursors for keyset pagination: base64url of a small JSON array.
import { InvalidInput } from './errors';

export function encodeCursor(parts: (string | number)[]): string {
  return Buffer.from(JSON.stringify(parts)).toString('base64url');
}

export function decodeCursor(cursor: string, length: number): (string | number)[] {
  try {
    const v = JSON.parse(Buffer.from(cursor, 'base64url').toString('utf8'));
    if (Array.isArray(v) && v.length === length && v.every((x) => typeof x === 'string' || typeof x === 'number')) return v;
  } catch {
    /* fall through */
  }
  throw new InvalidInput('the cursor is not one this API returned', [{ field: '/cursor', detail: 'not a valid cursor' }]);
}
