// The OpenAPI document's shape: every schema object carries only OpenAPI 3.1 / JSON Schema 2020-12
// keywords (or an `x-` extension). A comma inside an unquoted description in a YAML flow mapping
// (`{ type: string, description: a, b }`) silently splits it into a junk key `b: null`, which the
// validator ignores and the docs drop; this walk catches it, and any other stray or misspelt key.
import { describe, expect, it } from 'vitest';
import { HTTP_METHODS, loadApiDocument } from '../../openapi/load';

const SCHEMA_KEYWORDS = new Set([
  // JSON Schema 2020-12 core
  '$schema', '$id', '$ref', '$defs', '$comment', '$anchor', '$dynamicRef', '$dynamicAnchor', '$vocabulary',
  // applicators
  'allOf', 'anyOf', 'oneOf', 'not', 'if', 'then', 'else', 'dependentSchemas', 'prefixItems', 'items', 'contains',
  'properties', 'patternProperties', 'additionalProperties', 'propertyNames', 'unevaluatedItems', 'unevaluatedProperties',
  // validation
  'type', 'enum', 'const', 'multipleOf', 'maximum', 'exclusiveMaximum', 'minimum', 'exclusiveMinimum', 'maxLength', 'minLength',
  'pattern', 'maxItems', 'minItems', 'uniqueItems', 'maxContains', 'minContains', 'maxProperties', 'minProperties', 'required',
  'dependentRequired',
  // format, content, meta-data
  'format', 'contentEncoding', 'contentMediaType', 'contentSchema', 'title', 'description', 'default', 'deprecated', 'readOnly',
  'writeOnly', 'examples',
  // OpenAPI 3.1 additions to the Schema Object
  'discriminator', 'xml', 'externalDocs', 'example',
]);

/** Keywords whose value is a schema, a list of schemas, or a map of names to schemas. */
const ONE = ['not', 'if', 'then', 'else', 'items', 'contains', 'additionalProperties', 'propertyNames', 'unevaluatedItems', 'unevaluatedProperties', 'contentSchema'];
const LIST = ['allOf', 'anyOf', 'oneOf', 'prefixItems'];
const MAP = ['properties', 'patternProperties', '$defs', 'dependentSchemas'];

type Obj = Record<string, unknown>;
const isObj = (v: unknown): v is Obj => typeof v === 'object' && v !== null && !Array.isArray(v);

/** Every problem in one schema and its subschemas: "<where>: <key>" for each key that is no keyword. */
export function schemaProblems(schema: unknown, where: string, out: string[] = []): string[] {
  if (typeof schema === 'boolean') return out;
  if (!isObj(schema)) {
    out.push(`${where}: not a schema (${JSON.stringify(schema)})`);
    return out;
  }
  for (const [k, v] of Object.entries(schema)) {
    if (k.startsWith('x-')) continue;
    if (!SCHEMA_KEYWORDS.has(k)) out.push(`${where}: unexpected key ${JSON.stringify(k)} (value ${JSON.stringify(v)})`);
    else if (v === null && k !== 'default' && k !== 'const' && k !== 'example') out.push(`${where}/${k}: null`);
  }
  for (const k of ONE) if (k in schema) schemaProblems(schema[k], `${where}/${k}`, out);
  for (const k of LIST) {
    const list = schema[k];
    if (k in schema && !Array.isArray(list)) out.push(`${where}/${k}: not a list`);
    else if (Array.isArray(list)) list.forEach((s, i) => schemaProblems(s, `${where}/${k}/${i}`, out));
  }
  for (const k of MAP) {
    const map = schema[k];
    if (k in schema && !isObj(map)) out.push(`${where}/${k}: not a map`);
    else if (isObj(map)) for (const [name, s] of Object.entries(map)) schemaProblems(s, `${where}/${k}/${name}`, out);
  }
  return out;
}

const esc = (s: string) => s.replace(/~/g, '~0').replace(/\//g, '~1');

function contentSchemas(content: unknown, where: string, out: string[]): void {
  if (!isObj(content)) return;
  for (const [media, m] of Object.entries(content)) if (isObj(m) && 'schema' in m) schemaProblems(m.schema, `${where}/content/${esc(media)}/schema`, out);
}

function parameterSchemas(p: unknown, where: string, out: string[]): void {
  if (!isObj(p) || '$ref' in p) return;
  if ('schema' in p) schemaProblems(p.schema, `${where}/schema`, out);
  contentSchemas(p.content, where, out);
}

function responseSchemas(r: unknown, where: string, out: string[]): void {
  if (!isObj(r) || '$ref' in r) return;
  contentSchemas(r.content, where, out);
  if (isObj(r.headers)) for (const [h, def] of Object.entries(r.headers)) parameterSchemas(def, `${where}/headers/${esc(h)}`, out);
}

/** Every schema in the document: components (schemas, parameters, responses, bodies, headers) and each operation's inline ones. */
export function documentSchemaProblems(doc: Obj): string[] {
  const out: string[] = [];
  const c = (doc.components ?? {}) as Obj;
  for (const [name, s] of Object.entries((c.schemas ?? {}) as Obj)) schemaProblems(s, `#/components/schemas/${name}`, out);
  for (const [name, p] of Object.entries((c.parameters ?? {}) as Obj)) parameterSchemas(p, `#/components/parameters/${name}`, out);
  for (const [name, h] of Object.entries((c.headers ?? {}) as Obj)) parameterSchemas(h, `#/components/headers/${name}`, out);
  for (const [name, r] of Object.entries((c.responses ?? {}) as Obj)) responseSchemas(r, `#/components/responses/${name}`, out);
  for (const [name, b] of Object.entries((c.requestBodies ?? {}) as Obj)) if (isObj(b)) contentSchemas(b.content, `#/components/requestBodies/${name}`, out);
  for (const [path, item] of Object.entries((doc.paths ?? {}) as Obj)) {
    if (!isObj(item)) continue;
    const at = `#/paths/${esc(path)}`;
    ((item.parameters ?? []) as unknown[]).forEach((p, i) => parameterSchemas(p, `${at}/parameters/${i}`, out));
    for (const method of HTTP_METHODS) {
      const op = item[method];
      if (!isObj(op)) continue;
      ((op.parameters ?? []) as unknown[]).forEach((p, i) => parameterSchemas(p, `${at}/${method}/parameters/${i}`, out));
      if (isObj(op.requestBody)) contentSchemas(op.requestBody.content, `${at}/${method}/requestBody`, out);
      if (isObj(op.responses)) for (const [code, r] of Object.entries(op.responses)) responseSchemas(r, `${at}/${method}/responses/${code}`, out);
    }
  }
  return out;
}

/** Null values anywhere outside example data: in this document a null is always a YAML slip. */
function nulls(v: unknown, where: string, out: string[] = []): string[] {
  if (Array.isArray(v)) v.forEach((x, i) => nulls(x, `${where}/${i}`, out));
  else if (isObj(v)) {
    for (const [k, x] of Object.entries(v)) {
      if (['example', 'examples', 'default', 'const', 'enum'].includes(k)) continue;
      if (x === null) out.push(`${where}/${esc(k)}: null`);
      else nulls(x, `${where}/${esc(k)}`, out);
    }
  }
  return out;
}

describe('OpenAPI document shape', () => {
  const doc = loadApiDocument();

  it('carries only OpenAPI / JSON Schema keywords in every schema object', () => {
    expect(documentSchemaProblems(doc)).toEqual([]);
  });

  it('has no null value outside example data (an unquoted comma in a flow mapping makes one)', () => {
    expect(nulls(doc, '#')).toEqual([]);
  });

  it('catches a description split by a comma, in a component and in an inline schema', () => {
    const bad = loadApiDocument();
    const [name] = Object.keys(bad.components.schemas);
    bad.components.schemas[name!] = { type: 'string', description: 'unique among your products', 'not archived ones': null };
    const op = Object.values(bad.paths as Obj).find((i) => isObj(i) && isObj(i.get) && Array.isArray(i.get.parameters)) as Obj;
    ((op.get as Obj).parameters as unknown[]).push({ name: 'q', in: 'query', schema: { type: 'object', properties: { a: { type: 'string', maxlength: 3 } } } });
    const problems = documentSchemaProblems(bad);
    expect(problems.some((p) => p.includes('"not archived ones"'))).toBe(true);
    expect(problems.some((p) => p.includes('/properties/a: unexpected key "maxlength"'))).toBe(true);
  });
});
