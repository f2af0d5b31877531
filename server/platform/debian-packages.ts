// Makes sure the Debian packages Lotproof needs at run or test time are present.
// Installs missing ones with apt-get when running as root; otherwise stops with the one command to run.
import { execFileSync, spawnSync } from 'node:child_process';
import { existsSync, readdirSync } from 'node:fs';

export interface DebianPackage {
  /** Debian package name, passed to apt-get. */
  name: string;
  /** True when the package's payload is already usable on this machine. */
  present: () => boolean;
}

const hasPostgresServer = () =>
  existsSync('/usr/lib/postgresql') &&
  readdirSync('/usr/lib/postgresql').some((v) => existsSync(`/usr/lib/postgresql/${v}/bin/initdb`));

export const PACKAGES = {
  postgresql: { name: 'postgresql', present: hasPostgresServer },
  'r-base-core': { name: 'r-base-core', present: () => existsSync('/usr/bin/Rscript') },
  chromium: { name: 'chromium', present: () => existsSync('/usr/bin/chromium') },
  'poppler-utils': { name: 'poppler-utils', present: () => existsSync('/usr/bin/pdftotext') && existsSync('/usr/bin/pdftoppm') },
} satisfies Record<string, DebianPackage>;

export type PackageName = keyof typeof PACKAGES;

export class MissingPackagesError extends Error {}

/** Installs whatever of `names` is missing; throws MissingPackagesError with the command to run when it cannot. */
export function ensureDebianPackages(names: PackageName[], log: (line: string) => void = console.log): void {
  const missing = names.map((n) => PACKAGES[n]).filter((p) => !p.present());
  if (missing.length === 0) return;
  const list = missing.map((p) => p.name);
  const command = `apt-get install -y ${list.join(' ')}`;
  const isRoot = typeof process.getuid === 'function' && process.getuid() === 0;
  const hasApt = spawnSync('sh', ['-c', 'command -v apt-get'], { stdio: 'ignore' }).status === 0;
  if (!isRoot || !hasApt) {
    throw new MissingPackagesError(
      `Lotproof needs the Debian package(s) ${list.join(', ')}. Install them with:\n  sudo ${command}`,
    );
  }
  log(`Installing Debian package(s): ${list.join(', ')} (apt-get, non-interactive)…`);
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  execFileSync('apt-get', ['update', '-q'], { stdio: 'inherit', env });
  execFileSync('apt-get', ['install', '-y', '-q', '--no-install-recommends', ...list], { stdio: 'inherit', env });
  const still = missing.filter((p) => !p.present()).map((p) => p.name);
  if (still.length > 0) throw new MissingPackagesError(`apt-get finished but ${still.join(', ')} is still missing.`);
}
