// The OpenAPI document follows the server's cut into areas: every file with paths names its area
// at its top level (`x-lotproof-area`), the loader stamps each operation with it, and a file with
// paths but no area is refused.
import { copyFileSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { parse } from 'yaml';
import { afterEach, describe, expect, it } from 'vitest';
import { AREA_KEY, HTTP_METHODS, loadApiDocument, operationsOf } from '../../openapi/load';

const AREAS = ['system', 'identity', 'metering', 'products', 'verdicts', 'ledger', 'webhooks', 'certificates'];
const openapiDir = fileURLToPath(new URL('../../openapi/', import.meta.url));
const read = (path: string) => parse(readFileSync(path, 'utf8')) as Record<string, any>;

/** Each file of the document: its name, its declared area and the operationIds of its paths. */
const files = [
  { name: 'openapi.yaml', doc: read(join(openapiDir, 'openapi.yaml')) },
  ...readdirSync(join(openapiDir, 'parts'))
    .filter((f) => f.endsWith('.yaml'))
    .sort()
    .map((f) => ({ name: `parts/${f}`, doc: read(join(openapiDir, 'parts', f)) })),
].map(({ name, doc }) => ({
  name,
  area: doc[AREA_KEY] as unknown,
  operationIds: Object.values((doc.paths ?? {}) as Record<string, any>).flatMap((item) =>
    HTTP_METHODS.filter((m) => item?.[m]).map((m) => item[m].operationId as string),
  ),
}));

describe('OpenAPI areas', () => {
  const doc = loadApiDocument();
  const ops = operationsOf(doc);

  it('gives every operation an area among the known ones, in its Operation and in the document', () => {
    expect(ops.length).toBeGreaterThan(40);
    for (const op of ops) {
      expect(AREAS, op.operationId).toContain(op.area);
      expect(doc.paths[op.path][op.method][AREA_KEY], op.operationId).toBe(op.area);
    }
    expect(new Set(ops.map((o) => o.area))).toEqual(new Set(AREAS));
  });

  it('declares an area in openapi.yaml (system) and in every part with paths, one area per file', () => {
    expect(files.find((f) => f.name === 'openapi.yaml')?.area).toBe('system');
    for (const f of files) if (f.operationIds.length) expect(AREAS, f.name).toContain(f.area);
    const partAreas = files.filter((f) => f.name.startsWith('parts/') && f.operationIds.length).map((f) => f.area);
    expect(partAreas.sort()).toEqual(AREAS.filter((a) => a !== 'system').sort());
    for (const f of files.filter((f) => f.name.startsWith('parts/'))) {
      if (f.area !== undefined) expect(f.name, `${f.name} is named after its area`).toBe(`parts/${f.area}.yaml`);
    }
  });

  it("stamps each file's operations with the area the file declares", () => {
    const byId = new Map(ops.map((o) => [o.operationId, o]));
    let seen = 0;
    for (const f of files) {
      for (const id of f.operationIds) {
        expect(byId.get(id)?.area, `${id} (${f.name})`).toBe(f.area);
        seen++;
      }
    }
    expect(seen).toBe(ops.length);
  });

  it('keeps the top-level area declarations out of the merged root', () => {
    expect(AREA_KEY in doc).toBe(false);
  });

  it('puts the operations the issue lists in their areas', () => {
    const areaOf = Object.fromEntries(ops.map((o) => [o.operationId, o.area]));
    const expected: Record<string, string[]> = {
      system: ['getHealth', 'getReadiness', 'getCaller'],
      metering: ['getUsage'],
      products: ['listProducts', 'createProduct', 'getProduct', 'updateProduct', 'archiveProduct'],
      verdicts: ['submitLot', 'listVerdicts', 'getVerdict', 'exportVerdict', 'recomputeVerdict', 'getSeal', 'verifySeal', 'exportVerdicts', 'getJwks', 'listRulebooks'],
      ledger: ['listCheckpoints', 'issueCheckpoint', 'getLatestCheckpoint', 'getCheckpoint', 'getInclusionProof', 'getConsistencyProof', 'verifyLedger', 'startLedgerWalk', 'getLedgerWalk', 'listWitnesses', 'addWitness', 'removeWitness'],
      webhooks: ['listWebhooks', 'createWebhook', 'getWebhook', 'updateWebhook', 'deleteWebhook', 'sendTestWebhook', 'listWebhookDeliveries'],
    };
    for (const [area, ids] of Object.entries(expected)) for (const id of ids) expect(areaOf[id], id).toBe(area);
  });
});

describe('OpenAPI areas: the loader refuses', () => {
  let dir: string | undefined;
  afterEach(() => {
    if (dir) rmSync(dir, { recursive: true, force: true });
    dir = undefined;
  });

  /** A folder with a copy of openapi.yaml and one part of the given text. */
  function documentWith(part: string): string {
    dir = mkdtempSync(join(tmpdir(), 'lotproof-openapi-areas-'));
    copyFileSync(join(openapiDir, 'openapi.yaml'), join(dir, 'openapi.yaml'));
    mkdirSync(join(dir, 'parts'));
    writeFileSync(join(dir, 'parts', 'stray.yaml'), part);
    return dir;
  }

  const strayPath = [
    'paths:',
    '  /v1/stray:',
    '    get:',
    '      operationId: getStray',
    '      x-lotproof-access: public',
    '      responses:',
    "        '200': { description: ok }",
  ].join('\n');

  it('a part with paths but no area', () => {
    expect(() => loadApiDocument(documentWith(`${strayPath}\n`))).toThrow(/parts\/stray\.yaml has paths but no top-level x-lotproof-area/);
  });

  it('an area that is no area name', () => {
    expect(() => loadApiDocument(documentWith(`x-lotproof-area: [verdicts]\n${strayPath}\n`))).toThrow(/stray\.yaml: x-lotproof-area must be an area name/);
  });

  it('an operation that claims another area than its file', () => {
    const part = `x-lotproof-area: verdicts\n${strayPath}\n      x-lotproof-area: webhooks\n`;
    expect(() => loadApiDocument(documentWith(part))).toThrow(/GET \/v1\/stray says x-lotproof-area "webhooks", but the file's area is "verdicts"/);
  });

  it('an operation without an area, in operationsOf', () => {
    const doc = loadApiDocument();
    doc.paths['/v1/unowned'] = { get: { operationId: 'unowned', 'x-lotproof-access': 'public', responses: { '200': { description: 'ok' } } } };
    expect(() => operationsOf(doc)).toThrow(/unowned.*has no x-lotproof-area/);
  });

  it('but takes a part with an area, and one with no paths and no area', () => {
    const d = documentWith(`x-lotproof-area: verdicts\n${strayPath}\n`);
    writeFileSync(join(d, 'parts', 'empty.yaml'), 'components:\n  schemas:\n    Stray: { type: string }\n');
    const loaded = loadApiDocument(d);
    expect(operationsOf(loaded).find((o) => o.operationId === 'getStray')?.area).toBe('verdicts');
    expect(loaded.paths['/v1/stray'].get[AREA_KEY]).toBe('verdicts');
    expect(AREA_KEY in loaded).toBe(false);
  });
});
