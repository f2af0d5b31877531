// Form checks with the API's own schemas (generated at build time from openapi/ by
// console/build/validators.ts), so a form says before sending what the server would refuse, in
// the same terms: field messages keyed by the field's JSON pointer, in words.
import { ProductInput, WebhookInput } from 'virtual:lotproof-form-schemas';

type AjvError = NonNullable<typeof ProductInput.errors>[number];

const PATTERN_TEXT: Record<string, string> = {
  '/sku': 'Use letters, digits, dots, dashes or underscores, starting with a letter or digit (at most 64).',
  '/url': 'Start the address with http:// or https://.',
};

function words(e: AjvError): { pointer: string; text: string } | null {
  const p = e.params as Record<string, any>;
  switch (e.keyword) {
    case 'required':
      return { pointer: `${e.instancePath}/${p.missingProperty}`, text: 'Required.' };
    case 'additionalProperties':
      return { pointer: `${e.instancePath}/${p.additionalProperty}`, text: 'Not a field this form may send.' };
    case 'minLength':
      return { pointer: e.instancePath, text: p.limit === 1 ? 'Required.' : `At least ${p.limit} characters.` };
    case 'maxLength':
      return { pointer: e.instancePath, text: `At most ${p.limit} characters.` };
    case 'pattern':
      return { pointer: e.instancePath, text: PATTERN_TEXT[e.instancePath] ?? 'Not in the expected form.' };
    case 'exclusiveMinimum':
      return { pointer: e.instancePath, text: `Must be greater than ${p.limit}.` };
    case 'minimum':
      return { pointer: e.instancePath, text: `Must be at least ${p.limit}.` };
    case 'maximum':
      return { pointer: e.instancePath, text: `Must be at most ${p.limit}.` };
    case 'type':
      return { pointer: e.instancePath, text: String(p.type).includes('number') ? 'Enter a number.' : `Must be a ${String(p.type).replace(',null', '')}.` };
    case 'enum':
      return { pointer: e.instancePath, text: `Choose one of ${(p.allowedValues as unknown[]).join(', ')}.` };
    case 'format':
      return { pointer: e.instancePath, text: p.format === 'email' ? 'Not an e-mail address.' : p.format === 'uri' ? 'Not a web address.' : `Not a valid ${p.format}.` };
    case 'maxItems':
      return { pointer: e.instancePath, text: `At most ${p.limit}.` };
    case 'minItems':
      return { pointer: e.instancePath, text: p.limit === 1 ? 'Choose at least one.' : `At least ${p.limit}.` };
    case 'uniqueItems':
      return { pointer: e.instancePath, text: 'Each value only once.' };
    case 'oneOf':
    case 'anyOf':
    case 'if':
      return null;
    default:
      return { pointer: e.instancePath, text: e.message ? `${e.message.charAt(0).toUpperCase()}${e.message.slice(1)}.` : 'Not valid.' };
  }
}

function check(validate: typeof ProductInput, value: unknown): Record<string, string> {
  if (validate(value)) return {};
  const out: Record<string, string> = {};
  for (const e of validate.errors ?? []) {
    const w = words(e);
    if (!w) continue;
    const key = w.pointer || '/';
    if (!out[key]) out[key] = w.text;
  }
  if (Object.keys(out).length === 0) out['/'] = 'The form is not valid.';
  return out;
}

export const validateProductInput = (value: unknown) => check(ProductInput, value);
export const validateWebhookInput = (value: unknown) => check(WebhookInput, value);
