// Loads the OpenAPI document: `openapi.yaml` plus every `parts/*.yaml` (one per area of the API),
// merged into one document. Each part may add `paths`, `tags` and `components`; a name defined twice
// is an error. The merged document is the single source of truth for request and response shapes,
// for the generated types, for /docs, and (through `x-lotproof-access`) for who may call what.
//
// Every file with paths names the area of the API that owns them at its top level
// (`x-lotproof-area: identity`; openapi.yaml's own routes are `system`). The loader stamps each
// operation with its file's area (`x-lotproof-area` on the operation, so /v1/openapi.json shows
// every operation's owner) and refuses a file with paths but no area. The top-level keys themselves
// are not merged into the document.
import { readFileSync, readdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { parse } from 'yaml';

export type Access = 'public' | { scopes?: string[]; roles?: string[] };
export const HTTP_METHODS = ['get', 'put', 'post', 'delete', 'patch'] as const;
export type HttpMethod = (typeof HTTP_METHODS)[number];

export interface Operation {
  operationId: string;
  method: HttpMethod;
  path: string;
  access: Access;
  /** The area of the API that owns the operation (`x-lotproof-area`: system, identity, …). */
  area: string;
  definition: Record<string, unknown>;
}

type Doc = Record<string, any>;

/** The extension naming an area: at the top of each file of the document, and stamped on each operation. */
export const AREA_KEY = 'x-lotproof-area';
const AREA_NAME = /^[a-z][a-z0-9-]*$/;

const here = dirname(fileURLToPath(import.meta.url));

/**
 * Takes the top-level `x-lotproof-area` off a file of the document and returns it, so that it is
 * never merged into the document's root. A file with paths must have one.
 */
function takeArea(file: Doc, name: string): string | undefined {
  const area = file[AREA_KEY];
  delete file[AREA_KEY];
  if (area === undefined || area === null) {
    if (file.paths && typeof file.paths === 'object' && Object.keys(file.paths).length > 0) {
      throw new Error(`OpenAPI: ${name} has paths but no top-level ${AREA_KEY}; name the area of the API that owns them (e.g. "${AREA_KEY}: verdicts")`);
    }
    return undefined;
  }
  if (typeof area !== 'string' || !AREA_NAME.test(area)) {
    throw new Error(`OpenAPI: ${name}: ${AREA_KEY} must be an area name in lower case (e.g. "verdicts"), not ${JSON.stringify(area)}`);
  }
  return area;
}

/** Marks every operation of a file's paths with the file's area. */
function stampArea(paths: Doc, area: string, name: string): void {
  for (const [path, item] of Object.entries(paths)) {
    for (const method of HTTP_METHODS) {
      const definition = (item as Doc | null)?.[method];
      if (!definition || typeof definition !== 'object') continue;
      const own = definition[AREA_KEY];
      if (own !== undefined && own !== area) {
        throw new Error(`OpenAPI: ${name}: ${method.toUpperCase()} ${path} says ${AREA_KEY} ${JSON.stringify(own)}, but the file's area is "${area}"`);
      }
      definition[AREA_KEY] = area;
    }
  }
}

function mergeInto(target: Doc, source: Doc, where: string): void {
  for (const [key, value] of Object.entries(source)) {
    if (key in target) throw new Error(`OpenAPI: ${where}/${key} is defined twice`);
    target[key] = value;
  }
}

function securityFor(access: Access): Array<Record<string, string[]>> {
  if (access === 'public') return [];
  const out: Array<Record<string, string[]>> = [];
  if (access.scopes?.length) out.push({ apiKey: access.scopes });
  if (access.roles?.length) out.push({ session: access.roles });
  return out;
}

function validAccess(a: unknown): a is Access {
  if (a === 'public') return true;
  if (!a || typeof a !== 'object') return false;
  const o = a as Record<string, unknown>;
  const list = (v: unknown) => v === undefined || (Array.isArray(v) && v.every((x) => typeof x === 'string'));
  return list(o.scopes) && list(o.roles) && Boolean((o.scopes as string[] | undefined)?.length || (o.roles as string[] | undefined)?.length);
}

/**
 * The name under components/examples of an operation's captured example (openapi/parts/examples.yaml,
 * written by `npm run gen:examples`): "<operationId>.request" for its JSON request body,
 * "<operationId>.<status>" for a JSON answer, "<operationId>.<status>.<subtype>" for another type.
 */
export function exampleKey(operationId: string, status: string, contentType: string): string {
  if (contentType === 'request') return `${operationId}.request`;
  if (contentType === 'application/json') return `${operationId}.${status}`;
  return `${operationId}.${status}.${contentType.split('/')[1]!.replace(/[^A-Za-z0-9._-]/g, '-')}`;
}

/** Gives each request body and answer without an example of its own its captured one, if there is one. */
function attachCapturedExamples(root: Doc): void {
  const captured = (root.components.examples ?? {}) as Doc;
  const attach = (content: Doc | undefined, key: string, contentType: string) => {
    const media = content?.[contentType];
    if (!media || media.example !== undefined || media.examples || !(key in captured)) return;
    // exampleKey's names hold no "/" or "~", so they go into the pointer as they are
    media.examples = { captured: { $ref: `#/components/examples/${key}` } };
  };
  for (const op of operationsOf(root)) {
    const def = op.definition as Doc;
    if (def.requestBody && !('$ref' in def.requestBody)) attach(def.requestBody.content, exampleKey(op.operationId, '', 'request'), 'application/json');
    for (const [status, response] of Object.entries((def.responses ?? {}) as Doc)) {
      if (!/^2/.test(status) || '$ref' in response) continue;
      for (const contentType of Object.keys(response.content ?? {})) attach(response.content, exampleKey(op.operationId, status, contentType), contentType);
    }
  }
}

let cached: Doc | null = null;

/** The merged document (a fresh deep copy each call, so callers may not disturb one another). */
export function loadApiDocument(dir = here): Doc {
  if (!cached || dir !== here) {
    const root: Doc = parse(readFileSync(join(dir, 'openapi.yaml'), 'utf8'));
    const rootArea = takeArea(root, 'openapi.yaml');
    root.paths ??= {};
    if (rootArea) stampArea(root.paths, rootArea, 'openapi.yaml');
    root.components ??= {};
    root.tags ??= [];
    const partsDir = join(dir, 'parts');
    const parts = readdirSync(partsDir).filter((f) => f.endsWith('.yaml')).sort();
    for (const file of parts) {
      const part: Doc = parse(readFileSync(join(partsDir, file), 'utf8')) ?? {};
      const area = takeArea(part, `parts/${file}`);
      if (part.paths) {
        if (area) stampArea(part.paths, area, `parts/${file}`);
        mergeInto(root.paths, part.paths, `${file}: paths`);
      }
      if (part.tags) root.tags.push(...part.tags);
      for (const [section, entries] of Object.entries(part.components ?? {})) {
        root.components[section] ??= {};
        mergeInto(root.components[section], entries as Doc, `${file}: components/${section}`);
      }
    }
    for (const op of operationsOf(root)) {
      (op.definition as Doc).security = securityFor(op.access);
    }
    attachCapturedExamples(root);
    if (dir !== here) return root;
    cached = root;
  }
  return structuredClone(cached);
}

/** Every operation of the document; throws if one lacks an operationId, a valid access rule or an area. */
export function operationsOf(doc: Doc): Operation[] {
  const ops: Operation[] = [];
  for (const [path, item] of Object.entries(doc.paths ?? {})) {
    for (const method of HTTP_METHODS) {
      const definition = (item as Doc)[method];
      if (!definition) continue;
      if (typeof definition.operationId !== 'string') throw new Error(`OpenAPI: ${method.toUpperCase()} ${path} has no operationId`);
      const access = definition['x-lotproof-access'];
      if (!validAccess(access)) {
        throw new Error(`OpenAPI: ${definition.operationId} (${method.toUpperCase()} ${path}) declares no valid x-lotproof-access`);
      }
      const area = definition[AREA_KEY];
      if (typeof area !== 'string' || !AREA_NAME.test(area)) {
        throw new Error(`OpenAPI: ${definition.operationId} (${method.toUpperCase()} ${path}) has no ${AREA_KEY}; its file names none`);
      }
      ops.push({ operationId: definition.operationId, method, path, access, area, definition });
    }
  }
  return ops;
}
