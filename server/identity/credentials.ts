// Secrets at rest. Passwords: scrypt (memory-hard) with a per-user random salt, parameters stored
// beside the hash so they can be raised later. One-time tokens (sessions, invitations, password
// resets) are 256-bit random values; they are stored only as SHA-256 hashes, since a fast hash is
// enough for a high-entropy secret.
import { createHash, randomBytes, scrypt as scryptCb, timingSafeEqual, type ScryptOptions } from 'node:crypto';

const LOG_N = 15;
const R = 8;
const P = 1;
const KEY_LENGTH = 32;

function scrypt(password: string, salt: Buffer, opts: ScryptOptions): Promise<Buffer> {
  return new Promise((resolve, reject) => {
    scryptCb(password.normalize('NFC'), salt, KEY_LENGTH, { ...opts, maxmem: 128 * opts.N! * opts.r! * 2 }, (err, key) => (err ? reject(err) : resolve(key)));
  });
}

/** "scrypt$ln=15,r=8,p=1$<salt base64>$<hash base64>" */
export async function hashPassword(password: string): Promise<string> {
  const salt = randomBytes(16);
  const key = await scrypt(password, salt, { N: 2 ** LOG_N, r: R, p: P });
  return `scrypt$ln=${LOG_N},r=${R},p=${P}$${salt.toString('base64')}$${key.toString('base64')}`;
}

const STORED = /^scrypt\$ln=(\d+),r=(\d+),p=(\d+)\$([A-Za-z0-9+/=]+)\$([A-Za-z0-9+/=]+)$/;

/** True when the password matches the stored hash; compares in constant time. */
export async function verifyPassword(password: string, stored: string): Promise<boolean> {
  const m = STORED.exec(stored);
  if (!m) return false;
  const expected = Buffer.from(m[5]!, 'base64');
  const key = await scrypt(password, Buffer.from(m[4]!, 'base64'), { N: 2 ** Number(m[1]), r: Number(m[2]), p: Number(m[3]) });
  return key.length === expected.length && timingSafeEqual(key, expected);
}

let dummy: Promise<string> | null = null;
/** Spends the same time as a real check, so an unknown account cannot be told from a wrong password. */
export async function burnPasswordCheck(password: string): Promise<void> {
  dummy ??= hashPassword('lotproof-timing-equaliser');
  await verifyPassword(password, await dummy);
}

export function newToken(): string {
  return randomBytes(32).toString('base64url');
}

export function hashToken(token: string): Buffer {
  return createHash('sha256').update(token, 'utf8').digest();
}

export const TOKEN_PATTERN = /^[A-Za-z0-9_-]{43}$/;
