// The merged OpenAPI document as tests walk it: every operation, its parameters and its example
// body, with $refs resolved. Shared by the sweeps that cover every operation (authorisation
// matrix, malformed input), so an operation added later is covered without editing them.
import { loadApiDocument, operationsOf, type Operation } from '../../openapi/load';

export type Doc = Record<string, any>;
export const apiDocument: Doc = loadApiDocument();
export const apiOperations: Operation[] = operationsOf(apiDocument);

/** Follows a local $ref ("#/components/…", RFC 6901 escapes undone); anything else is returned as it is. */
export function resolveRef(ref: unknown): Doc {
  if (ref && typeof ref === 'object' && '$ref' in (ref as Doc)) {
    return String((ref as Doc).$ref)
      .replace(/^#\//, '')
      .split('/')
      .map((k) => k.replace(/~1/g, '/').replace(/~0/g, '~'))
      .reduce((o: Doc, k) => o[k], apiDocument);
  }
  return ref as Doc;
}

/** The operation's parameters, path-level ones included. */
export function parametersOf(op: Operation): Doc[] {
  const item = apiDocument.paths[op.path];
  return [...(item.parameters ?? []), ...((op.definition.parameters as unknown[]) ?? [])].map(resolveRef);
}

/** The JSON request body's schema, or undefined without one. */
export function bodySchemaOf(op: Operation): Doc | undefined {
  const content = resolveRef((op.definition.requestBody as Doc | undefined) ?? {})?.content?.['application/json'];
  return content?.schema ? resolveRef(content.schema) : undefined;
}

/** The example JSON body the document gives for the operation (`example`, else the first of `examples`). */
export function exampleBody(op: Operation): unknown {
  const content = resolveRef((op.definition.requestBody as Doc | undefined) ?? {})?.content?.['application/json'];
  if (!content) return undefined;
  if (content.example !== undefined) return content.example;
  const first = Object.values((content.examples ?? {}) as Record<string, Doc>)[0];
  return first ? resolveRef(first).value : undefined;
}
