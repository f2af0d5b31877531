// `npm run gen:types`: writes TypeScript types for the merged OpenAPI document to shared/api/schema.ts.
// Server, console and clients import these; nobody writes request or response types by hand.
// A test (tests/unit/openapi.test.ts) fails when the committed file is out of date.
import { writeFileSync, mkdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { renderApiTypes } from './render-types';

const out = join(dirname(fileURLToPath(import.meta.url)), '..', 'shared', 'api', 'schema.ts');
mkdirSync(dirname(out), { recursive: true });
writeFileSync(out, await renderApiTypes());
console.log(`wrote ${out}`);
