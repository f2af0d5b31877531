// The server's layout, read from its imports: areas stand on the shared seams (core/, db/, http/,
// platform/, shared/engine), never the other way round, and only an area's HTTP side — its
// routes.ts and files named *.http.ts — speaks HTTP. (DEVELOPERS.md, "Map", says the same in words.)
import { readdirSync, readFileSync, statSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

const serverDir = fileURLToPath(new URL('../../server/', import.meta.url));
const AREAS = ['system', 'identity', 'metering', 'products', 'verdicts', 'ledger', 'webhooks', 'certificates'];
const SEAMS = ['core', 'db', 'http', 'platform'];

function filesUnder(dir: string): string[] {
  return readdirSync(dir).flatMap((name) => {
    const path = join(dir, name);
    return statSync(path).isDirectory() ? filesUnder(path) : name.endsWith('.ts') ? [path] : [];
  });
}

/** Every module a file imports: server folders as "server/<folder>/<file>", packages by name. */
function importsOf(file: string): string[] {
  const text = readFileSync(file, 'utf8');
  const specs = [...text.matchAll(/(?:from\s+|import\s*\(\s*|import\s+)['"]([^'"]+)['"]/g)].map((m) => m[1]!);
  return specs.map((s) => (s.startsWith('.') ? relative(join(serverDir, '..'), resolve(dirname(file), s)) : s));
}

const serverFiles = filesUnder(serverDir).map((path) => ({ path, name: relative(join(serverDir, '..'), path), imports: importsOf(path) }));
const inFolder = (folder: string) => serverFiles.filter((f) => f.name.startsWith(`server/${folder}/`));
const isHttpSide = (name: string) => /\/routes\.ts$|\.http\.ts$/.test(name);
const speaksHttp = (spec: string) => spec.startsWith('server/http/') || spec === 'express' || spec.startsWith('passport');

describe('server layout', () => {
  it('finds every area and seam folder it describes', () => {
    for (const folder of [...AREAS, ...SEAMS]) expect(inFolder(folder).length, folder).toBeGreaterThan(0);
  });

  it("keeps HTTP out of an area's rules and persistence: only routes.ts and *.http.ts import http/ or express", () => {
    const offenders = AREAS.flatMap(inFolder)
      .filter((f) => !isHttpSide(f.name))
      .flatMap((f) => f.imports.filter(speaksHttp).map((spec) => `${f.name} → ${spec}`));
    expect(offenders).toEqual([]);
  });

  it('lets no seam reach up into an area (the model registry aside, which db/database.ts initialises)', () => {
    const up = SEAMS.flatMap(inFolder).flatMap((f) =>
      f.imports.filter((spec) => AREAS.some((a) => spec.startsWith(`server/${a}/`))).map((spec) => `${f.name} → ${spec}`),
    );
    expect(up).toEqual([]);
  });

  it('keeps core/ transport-neutral: no http/, no express', () => {
    const offenders = inFolder('core').flatMap((f) => f.imports.filter(speaksHttp).map((spec) => `${f.name} → ${spec}`));
    expect(offenders).toEqual([]);
  });

  it('gives every area its handlers in routes.ts', () => {
    for (const area of AREAS) expect(inFolder(area).map((f) => f.name), area).toContain(`server/${area}/routes.ts`);
  });

  it('has no file left in the old layer folders', () => {
    for (const old of ['services', 'routes', 'models']) expect(inFolder(old), old).toEqual([]);
  });
});
