// Reading a big JSON body on the aside thread (core/aside-thread.ts): JSON.parse of a lot of a
// million measurements holds a thread for 150–250 ms, and handing the parsed array back as it is
// would cost the main thread about as much again (a structured clone of a million numbers). So
// the aside thread also checks each array of numbers that the operation's schema declares at the
// top of its body, exactly as the schema's rules read — `type: array` of `items: { type: number,
// minimum, maximum }` and nothing else — and sends each one that passes back as a Float64Array
// (moved, not copied), leaving an empty array in its place for the OpenAPI validator, which then
// checks every other rule of the body with its own problems and pointers. An array that breaks a
// rule (a string, a null, a value out of range) stays in the body, for the validator to refuse
// exactly as it always has.
import { asideTask, type AsideResult } from '../core/aside-thread';

/** An array property of a JSON body whose items the schema holds to `type: number` and a range, and to nothing else. */
export interface NumberArrayRule {
  name: string;
  minimum: number;
  maximum: number;
}

type Schema = Record<string, unknown>;

const onlyKeys = (o: Schema, allowed: string[]) => Object.keys(o).every((k) => allowed.includes(k));

/**
 * The number arrays of an object schema that can be checked aside: an array property with no
 * keyword but `type`, `items` and `description`, whose items have only `type: number`, `minimum`
 * and `maximum` (finite numbers). Any other form (a length limit, a `$ref`, an exclusive bound) is
 * left to the validator. `resolve` follows a `$ref` of the body schema itself.
 */
export function numberArrayRules(bodySchema: Schema | undefined, resolve: (ref: string) => Schema | undefined): NumberArrayRule[] {
  const schema = typeof bodySchema?.$ref === 'string' ? resolve(bodySchema.$ref) : bodySchema;
  if (!schema || schema.type !== 'object' || typeof schema.properties !== 'object' || schema.properties === null) return [];
  const rules: NumberArrayRule[] = [];
  for (const [name, p] of Object.entries(schema.properties as Record<string, Schema>)) {
    if (p?.type !== 'array' || !onlyKeys(p, ['type', 'items', 'description'])) continue;
    const items = p.items as Schema | undefined;
    if (!items || items.type !== 'number' || !onlyKeys(items, ['type', 'minimum', 'maximum'])) continue;
    const { minimum, maximum } = items as { minimum: unknown; maximum: unknown };
    if (typeof minimum !== 'number' || typeof maximum !== 'number' || !Number.isFinite(minimum) || !Number.isFinite(maximum)) continue;
    rules.push({ name, minimum, maximum });
  }
  return rules;
}

const BOM = [0xef, 0xbb, 0xbf];

/** A JSON text's value as body-parser's strict parser gave it (an empty body is {}); a refusal is its message. */
export function parseJsonText(buf: Uint8Array): { ok: true; value: unknown } | { ok: false; message: string } {
  const from = buf[0] === BOM[0] && buf[1] === BOM[1] && buf[2] === BOM[2] ? 3 : 0;
  const text = Buffer.from(buf.buffer, buf.byteOffset, buf.byteLength).toString('utf8', from);
  if (text.length === 0) return { ok: true, value: {} };
  const first = /\S/.exec(text);
  if (!first) return { ok: false, message: 'Unexpected end of JSON input' };
  if (first[0] !== '{' && first[0] !== '[') return { ok: false, message: `Unexpected token '${first[0]}' at position ${first.index}: the body must be a JSON object or array` };
  try {
    return { ok: true, value: JSON.parse(text) };
  } catch (err) {
    return { ok: false, message: (err as Error).message };
  }
}

/** Every item a number within the rule's range (as ajv's `type: number`, `minimum`, `maximum` read it), as a Float64Array; else null. */
function checkedNumbers(value: unknown, rule: NumberArrayRule): Float64Array | null {
  if (!Array.isArray(value)) return null;
  const out = new Float64Array(value.length);
  for (let i = 0; i < value.length; i++) {
    const v: unknown = value[i];
    if (typeof v !== 'number' || !(v >= rule.minimum && v <= rule.maximum)) return null;
    out[i] = v;
  }
  return out;
}

export interface ParsedAside {
  parsed: { ok: true; value: unknown } | { ok: false; message: string };
  /** The arrays taken out of the body (each left there as []), by property name. */
  numbers: Record<string, Float64Array>;
}

/** The aside thread's task: parse the body, take out each number array that keeps its rule. */
export const parseJsonSettingAside = asideTask(import.meta.url, 'parseJsonSettingAside', ({ bytes, rules }: { bytes: Uint8Array; rules: NumberArrayRule[] }): AsideResult<ParsedAside> => {
  const parsed = parseJsonText(bytes);
  const numbers: Record<string, Float64Array> = {};
  if (parsed.ok && typeof parsed.value === 'object' && parsed.value !== null && !Array.isArray(parsed.value)) {
    const body = parsed.value as Record<string, unknown>;
    for (const rule of rules) {
      if (!Object.hasOwn(body, rule.name)) continue;
      const checked = checkedNumbers(body[rule.name], rule);
      if (!checked) continue;
      numbers[rule.name] = checked;
      body[rule.name] = [];
    }
  }
  return { value: { parsed, numbers }, transfer: Object.values(numbers).map((a) => a.buffer as ArrayBuffer) };
});
