// Key files in the data folder (the seal signing key, the secrets key): created once with mode
// 0600, then read. Several processes starting at once agree on one key: the first writes it
// ('wx' fails for the others, who read what it wrote).
import { chmodSync, existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';

/** The text of <dir>/<name>, written from create() first if the file does not exist. */
export function readOrCreateKeyFile(dir: string, name: string, create: () => string): string {
  const file = join(dir, name);
  if (!existsSync(file)) {
    mkdirSync(dir, { recursive: true });
    try {
      writeFileSync(file, create(), { mode: 0o600, flag: 'wx' });
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code !== 'EEXIST') throw err;
    }
  }
  try {
    chmodSync(file, 0o600);
  } catch {
    /* read-only mount: fine */
  }
  return readFileSync(file, 'utf8');
}
