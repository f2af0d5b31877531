// The OpenAPI document is the single source of truth: it loads, every operation declares who may
// call it, and the committed generated types match it.
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { loadApiDocument, operationsOf } from '../../openapi/load';
import { renderApiTypes } from '../../openapi/render-types';

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
