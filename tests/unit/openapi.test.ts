// The OpenAPI document is the single source of truth: it loads, every operation declares who may
// call it, and the committed generated types match it.
import { readFileSync } from 'node:fs';
import Ajv2020 from 'ajv/dist/2020.js';
import addFormats from 'ajv-formats';
import { describe, expect, it } from 'vitest';
import { loadApiDocument, operationsOf } from '../../openapi/load';
import { renderApiTypes } from '../../openapi/render-types';
import { apiDocument, resolveRef } from '../support/operations';

describe('OpenAPI document', () => {
  it('declares an operationId and an access rule on every operation', () => {
    const ops = operationsOf(loadApiDocument());
    expect(ops.length).toBeGreaterThan(2);
    for (const op of ops) expect(op.access, op.operationId).toBeTruthy();
  });

  it('refuses an operation without x-lotproof-access', () => {
    const doc = loadApiDocument();
    doc.paths['/v1/undeclared'] = { get: { operationId: 'undeclared', responses: { '200': { description: 'ok' } } } };
    expect(() => operationsOf(doc)).toThrow(/undeclared.*x-lotproof-access/);
  });

  it('has committed generated types that match the document (run `npm run gen:types`)', async () => {
    const committed = readFileSync(new URL('../../shared/api/schema.ts', import.meta.url), 'utf8');
    expect(committed).toBe(await renderApiTypes());
  });
});

describe('examples', () => {
  const doc = apiDocument;
  const resolve = resolveRef;
  /** Every example of a media object: [name, value]. */
  const examplesOf = (media: any): [string, unknown][] => [
    ...(media.example !== undefined ? [['example', media.example] as [string, unknown]] : []),
    ...Object.entries(media.examples ?? {}).map(([name, e]) => [name, resolve(e).value] as [string, unknown]),
  ];
  /** Each JSON request body and each 2xx answer with content, of every operation. */
  const media = operationsOf(doc).flatMap((op) => {
    const def = op.definition as any;
    const out: { where: string; media: any }[] = [];
    const body = resolve(def.requestBody);
    if (body?.content?.['application/json']) out.push({ where: `${op.operationId} request`, media: body.content['application/json'] });
    for (const [status, r] of Object.entries<any>(def.responses ?? {})) {
      if (!/^2/.test(status)) continue;
      for (const [type, m] of Object.entries<any>(resolve(r).content ?? {})) out.push({ where: `${op.operationId} ${status} ${type}`, media: m });
    }
    return out;
  });

  it('every operation shows an example request body and an example answer in /docs (run `npm run gen:examples` for new ones)', () => {
    expect(media.length).toBeGreaterThan(40);
    const without = media.filter((m) => examplesOf(m.media).length === 0).map((m) => m.where);
    expect(without).toEqual([]);
  });

  it('every example validates against its schema, so none can drift from the API it shows', () => {
    const ajv = new Ajv2020({ strict: false, allErrors: true, validateSchema: false });
    addFormats(ajv);
    ajv.addSchema({ $id: 'lotproof-api', components: doc.components });
    const rebase = (s: unknown): unknown =>
      Array.isArray(s) ? s.map(rebase) : s && typeof s === 'object'
        ? Object.fromEntries(Object.entries(s).map(([k, v]) => [k, k === '$ref' && typeof v === 'string' && v.startsWith('#/') ? `lotproof-api${v}` : rebase(v)]))
        : s;
    let checked = 0;
    for (const { where, media: m } of media) {
      if (!m.schema) continue;
      const validate = ajv.compile(rebase(m.schema) as object);
      for (const [name, value] of examplesOf(m)) {
        checked++;
        expect(validate(value), `${where} example ${name}: ${JSON.stringify(validate.errors)?.slice(0, 600)}`).toBe(true);
      }
    }
    expect(checked).toBeGreaterThan(40);
  });
});
