// Loads the OpenAPI document: `openapi.yaml` plus every `parts/*.yaml` (one per area of the API),
// merged into one document. Each part may add `paths`, `tags` and `components`; a name defined twice
// is an error. The merged document is the single source of truth for request and response shapes,
// for the generated types, for /docs, and (through `x-lotproof-access`) for who may call what.
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
  definition: Record<string, unknown>;
}

type Doc = Record<string, any>;

const here = dirname(fileURLToPath(import.meta.url));

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
    root.paths ??= {};
    root.components ??= {};
    root.tags ??= [];
    const partsDir = join(dir, 'parts');
    const parts = readdirSync(partsDir).filter((f) => f.endsWith('.yaml')).sort();
    for (const file of parts) {
      const part: Doc = parse(readFileSync(join(partsDir, file), 'utf8')) ?? {};
      if (part.paths) mergeInto(root.paths, part.paths, `${file}: paths`);
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

/** Every operation of the document; throws if one lacks an operationId or a valid access rule. */
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
      ops.push({ operationId: definition.operationId, method, path, access, definition });
    }
  }
  return ops;
}
