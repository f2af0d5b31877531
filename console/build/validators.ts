// Build-time validators for the console's forms, generated from the very schemas the API
// validates requests with (openapi/, components/schemas). Ajv compiles them to plain JavaScript
// here, at build time ("standalone" code), because the console's Content-Security-Policy does
// not allow compiling code in the browser.
import Ajv2020 from 'ajv/dist/2020.js';
import addFormats from 'ajv-formats';
import standaloneCode from 'ajv/dist/standalone/index.js';
import { loadApiDocument } from '../../openapi/load';

export const FORM_SCHEMAS = ['ProductInput', 'WebhookInput'] as const;
export const VIRTUAL_ID = 'virtual:lotproof-form-schemas';

export function formValidatorsSource(): string {
  const doc = loadApiDocument();
  const ajv = new Ajv2020({ allErrors: true, strict: false, validateSchema: false, code: { source: true, esm: true } });
  addFormats(ajv);
  ajv.addSchema({ $id: 'lotproof-api', components: doc.components });
  const refs: Record<string, string> = {};
  for (const name of FORM_SCHEMAS) refs[name] = `lotproof-api#/components/schemas/${name}`;
  return asEsModule(standaloneCode(ajv, refs));
}

/**
 * Ajv's standalone output reaches its small runtime helpers through require() even in ESM mode;
 * turn each `require("m").prop` into an import of m, whatever the bundler's CommonJS interop.
 */
function asEsModule(code: string): string {
  const imports: string[] = [];
  const seen = new Map<string, string>();
  const body = code.replace(/require\("([^"]+)"\)\.(\w+)/g, (_m, mod: string, prop: string) => {
    let id = seen.get(mod);
    if (!id) {
      id = `__cjs${seen.size}`;
      seen.set(mod, id);
      imports.push(`import * as ${id} from ${JSON.stringify(mod.endsWith('.js') ? mod : `${mod}.js`)};`);
    }
    return `__pick(${id}, ${JSON.stringify(prop)})`;
  });
  if (/require\(/.test(body)) throw new Error('form validators: a require() the console cannot bundle is left in Ajv output');
  const pick =
    "const __pick = (ns, key) => { const v = ns[key]; if (v !== undefined && !(key === 'default' && v && typeof v === 'object' && 'default' in v)) return v; const d = ns.default; return d && d[key] !== undefined ? d[key] : v; };";
  return `${imports.join('\n')}\n${pick}\n${body.replace(/^"use strict";/, '')}`;
}

/** The Vite plugin serving the generated validators as `virtual:lotproof-form-schemas`. */
export function formSchemasPlugin() {
  const resolved = `\0${VIRTUAL_ID}`;
  return {
    name: 'lotproof-form-schemas',
    resolveId(id: string) {
      return id === VIRTUAL_ID ? resolved : null;
    },
    load(id: string) {
      return id === resolved ? formValidatorsSource() : null;
    },
  };
}
