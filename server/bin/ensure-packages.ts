// `tsx server/bin/ensure-packages.ts postgresql r-base-core chromium` — used by .ci/run and by hand.
import { ensureDebianPackages, MissingPackagesError, PACKAGES, type PackageName } from '../platform/debian-packages';

const names = process.argv.slice(2) as PackageName[];
const unknown = names.filter((n) => !(n in PACKAGES));
if (unknown.length > 0) {
  console.error(`Unknown package(s): ${unknown.join(', ')}. Known: ${Object.keys(PACKAGES).join(', ')}`);
  process.exit(2);
}
try {
  ensureDebianPackages(names.length > 0 ? names : (Object.keys(PACKAGES) as PackageName[]));
} catch (err) {
  if (err instanceof MissingPackagesError) {
    console.error(err.message);
    process.exit(1);
  }
  throw err;
}
