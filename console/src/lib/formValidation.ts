// Form checks with the API's own schemas (generated at build time from openapi/ by
// console/build/validators.ts), so a form says before sending what the server would refuse, in
// the user's words: one plain sentence per field, naming the field, keyed by its JSON pointer.
// The server's own field messages (its validator speaks Ajv's English, "must NOT have fewer than
// 3 characters") are put into the same words by `plainFieldMessage`.
import { ProductInput, WebhookInput } from 'virtual:lotproof-form-schemas';

/** What the validator reports, whether from the compiled schemas or read back from the server's message. */
interface Finding {
  keyword: string;
  instancePath: string;
  params: Record<string, any>;
  message?: string;
}

/** The fields' names as the forms label them, by pointer (an array's items by the array's pointer). */
const FIELD_NAMES: Record<string, string> = {
  '/sku': 'SKU code',
  '/name': 'name',
  '/description': 'description',
  '/nominalQuantity': 'nominal quantity',
  '/unit': 'unit',
  '/tareMode': 'tare mode',
  '/fixedTare': 'tare of one pack',
  '/tareUnit': 'tare unit',
  '/density': 'density',
  '/rulebook': 'rulebook',
  '/rulebook/id': 'rulebook',
  '/rulebook/params/alpha': 'significance level α',
  '/rulebook/params/minimumSampleSize': 'smallest sample',
  '/rulebook/params/nonDestructivePlan': 'sampling plan',
  '/alertRecipients': 'alert recipients',
  '/url': 'address',
  '/events': 'events',
  '/email': 'e-mail address',
  '/password': 'password',
  '/role': 'role',
  '/lotCode': 'lot code',
  '/line': 'line',
  '/lotSize': 'lot size',
  '/packedAt': 'packing date',
  '/measurements': 'measurements',
  '/clientReference': 'your reference',
};

const PATTERN_TEXT: Record<string, string> = {
  '/sku': 'may use letters, digits, dots, dashes or underscores, starts with a letter or digit and has at most 64 characters',
  '/url': 'starts with http:// or https://',
};

const ORDINAL = (i: number) => {
  const n = i + 1;
  const s = n % 100 >= 11 && n % 100 <= 13 ? 'th' : ({ 1: 'st', 2: 'nd', 3: 'rd' } as Record<number, string>)[n % 10] ?? 'th';
  return `${n}${s}`;
};

/** "the nominal quantity", "the 2nd of the alert recipients", or the pointer's last word spelt out. */
export function fieldName(pointer: string): string {
  if (FIELD_NAMES[pointer]) return `the ${FIELD_NAMES[pointer]}`;
  const item = /^(.*)\/(\d+)$/.exec(pointer);
  if (item && FIELD_NAMES[item[1]!]) return `the ${ORDINAL(Number(item[2]))} of the ${FIELD_NAMES[item[1]!]}`;
  const last = pointer.split('/').filter(Boolean).pop();
  if (!last) return 'the form';
  return `the ${last.replace(/([a-z])([A-Z])/g, '$1 $2').toLowerCase()}`;
}

const capital = (s: string) => `${s.charAt(0).toUpperCase()}${s.slice(1)}`;
const characters = (n: number) => (n === 1 ? '1 character' : `${n} characters`);

function words(e: Finding): { pointer: string; text: string } | null {
  const p = e.params;
  const at = (pointer: string, text: string) => ({ pointer, text });
  const name = fieldName(e.instancePath);
  switch (e.keyword) {
    case 'required': {
      const pointer = `${e.instancePath}/${p.missingProperty}`;
      return at(pointer, `Enter ${fieldName(pointer)}.`);
    }
    case 'additionalProperties':
      return at(`${e.instancePath}/${p.additionalProperty}`, `The form sent “${p.additionalProperty}”, which is not a field of this form; reload the page.`);
    case 'minLength':
      return at(e.instancePath, p.limit === 1 ? `Enter ${name}.` : `${capital(name)} needs at least ${characters(p.limit)}.`);
    case 'maxLength':
      return at(e.instancePath, `${capital(name)} can have at most ${characters(p.limit)}.`);
    case 'pattern':
      return at(e.instancePath, PATTERN_TEXT[e.instancePath] ? `Check ${name}: it ${PATTERN_TEXT[e.instancePath]}.` : `${capital(name)} is not in the expected form.`);
    case 'exclusiveMinimum':
      return at(e.instancePath, `${capital(name)} must be more than ${p.limit}.`);
    case 'minimum':
      return at(e.instancePath, `${capital(name)} must be at least ${p.limit}.`);
    case 'exclusiveMaximum':
      return at(e.instancePath, `${capital(name)} must be less than ${p.limit}.`);
    case 'maximum':
      return at(e.instancePath, `${capital(name)} must be at most ${p.limit}.`);
    case 'type': {
      const t = String(p.type);
      if (t.includes('number') || t.includes('integer')) return at(e.instancePath, `Enter ${name} as a${t.includes('integer') && !t.includes('number') ? ' whole' : ''} number.`);
      return at(e.instancePath, `Enter ${name} as ${t.includes('array') ? 'a list' : t.includes('boolean') ? 'yes or no' : 'text'}.`);
    }
    case 'enum':
      return at(e.instancePath, Array.isArray(p.allowedValues) ? `Choose ${name}: one of ${p.allowedValues.join(', ')}.` : `Choose ${name} from the list.`);
    case 'const':
      return at(e.instancePath, `Choose ${name} from the list.`);
    case 'format':
      return at(
        e.instancePath,
        p.format === 'email'
          ? `${capital(name)} is not an e-mail address.`
          : p.format === 'uri'
            ? `${capital(name)} is not a web address.`
            : p.format === 'date' || p.format === 'date-time'
              ? `${capital(name)} is not a date.`
              : `${capital(name)} is not in the expected form.`,
      );
    case 'maxItems':
      return at(e.instancePath, `${capital(name)} can have at most ${p.limit}.`);
    case 'minItems':
      return at(e.instancePath, p.limit === 1 ? `Choose at least one of ${name}.` : `${capital(name)} needs at least ${p.limit}.`);
    case 'uniqueItems':
      return at(e.instancePath, `${capital(name)} list a value twice; give each only once.`);
    case 'minProperties':
      return at(e.instancePath, 'Change at least one field.');
    case 'oneOf':
    case 'anyOf':
    case 'if':
      // The branch's own keyword (type, enum, …) is reported beside it and says it better.
      return null;
    default:
      return at(e.instancePath, `${capital(name)} is not valid.`);
  }
}

function check(validate: typeof ProductInput, value: unknown): Record<string, string> {
  if (validate(value)) return {};
  const out: Record<string, string> = {};
  for (const e of validate.errors ?? []) {
    const w = words(e as Finding);
    if (!w) continue;
    const key = w.pointer || '/';
    if (!out[key]) out[key] = w.text;
  }
  if (Object.keys(out).length === 0) out['/'] = 'Some of the form is not valid; check each field.';
  return out;
}

export const validateProductInput = (value: unknown) => check(ProductInput, value);
export const validateWebhookInput = (value: unknown) => check(WebhookInput, value);

// Ajv's English messages (ajv/lib/vocabularies), as the server's validator passes them on, read
// back into the keyword and its parameters.
const AJV_MESSAGES: Array<[RegExp, (m: RegExpExecArray) => Omit<Finding, 'instancePath'>]> = [
  [/^must NOT have fewer than (\d+) characters$/, (m) => ({ keyword: 'minLength', params: { limit: Number(m[1]) } })],
  [/^must NOT have more than (\d+) characters$/, (m) => ({ keyword: 'maxLength', params: { limit: Number(m[1]) } })],
  [/^must NOT have fewer than (\d+) items$/, (m) => ({ keyword: 'minItems', params: { limit: Number(m[1]) } })],
  [/^must NOT have more than (\d+) items$/, (m) => ({ keyword: 'maxItems', params: { limit: Number(m[1]) } })],
  [/^must NOT have fewer than (\d+) properties$/, () => ({ keyword: 'minProperties', params: {} })],
  [/^must NOT have duplicate items/, () => ({ keyword: 'uniqueItems', params: {} })],
  [/^must NOT have additional properties$/, () => ({ keyword: 'additionalProperties', params: { additionalProperty: '' } })],
  [/^must be > (.+)$/, (m) => ({ keyword: 'exclusiveMinimum', params: { limit: m[1] } })],
  [/^must be >= (.+)$/, (m) => ({ keyword: 'minimum', params: { limit: m[1] } })],
  [/^must be < (.+)$/, (m) => ({ keyword: 'exclusiveMaximum', params: { limit: m[1] } })],
  [/^must be <= (.+)$/, (m) => ({ keyword: 'maximum', params: { limit: m[1] } })],
  [/^must be equal to one of the allowed values(?:: (.+))?$/, (m) => ({ keyword: 'enum', params: m[1] ? { allowedValues: m[1].split(', ') } : {} })],
  [/^must be equal to constant$/, () => ({ keyword: 'const', params: {} })],
  [/^must match format "([^"]+)"$/, (m) => ({ keyword: 'format', params: { format: m[1] } })],
  [/^must match pattern /, () => ({ keyword: 'pattern', params: {} })],
  [/^must be ([a-z]+(?:,[a-z]+)*)$/, (m) => ({ keyword: 'type', params: { type: m[1] } })],
];

/**
 * A server's field message in the user's words: a validator's message ("must NOT have fewer than
 * 3 characters", "must have required property 'name'") becomes a sentence naming the field; any
 * other message (the rules' own, already written for people) is kept.
 */
export function plainFieldMessage(pointer: string, detail: string): string {
  const required = /^must have required property '([^']+)'$/.exec(detail);
  if (required) {
    const target = pointer.endsWith(`/${required[1]}`) ? pointer : `${pointer}/${required[1]}`;
    return `Enter ${fieldName(target)}.`;
  }
  for (const [re, read] of AJV_MESSAGES) {
    const m = re.exec(detail);
    if (m) {
      const w = words({ ...read(m), instancePath: pointer });
      if (w) return w.text;
    }
  }
  return detail;
}

/**
 * The errors a form marks, one message per field it shows: each error goes to the field whose
 * pointer is the longest that equals or contains the error's pointer (the alert recipients field
 * takes "/alertRecipients/2"), so the count of marked fields is the count the form reports.
 * Errors no shown field takes are returned apart, for the form's summary to say.
 */
export function placeErrors(
  errors: Record<string, string>,
  fields: Record<string, readonly string[]>,
): { byField: Record<string, string>; unplaced: string[]; count: number } {
  const byField: Record<string, string> = {};
  const unplaced: string[] = [];
  for (const [pointer, text] of Object.entries(errors)) {
    let best: { field: string; length: number } | null = null;
    for (const [field, pointers] of Object.entries(fields)) {
      for (const p of pointers) {
        if ((pointer === p || pointer.startsWith(`${p}/`)) && (!best || p.length > best.length)) best = { field, length: p.length };
      }
    }
    if (!best) unplaced.push(text);
    else byField[best.field] = byField[best.field] ? `${byField[best.field]} ${text}` : text;
  }
  return { byField, unplaced, count: Object.keys(byField).length };
}
