// Issue 14, item 9: a product's rulebook choice takes exactly the parameters its rulebook lists
// (`info.parameters` in shared/engine/rulebooks/*.ts), each of a bounded size, and nothing else.
// The OpenAPI schema says so (RulebookChoice, RulebookParams); this keeps the two in step when a
// rulebook gains or loses a parameter.
import Ajv2020 from 'ajv/dist/2020.js';
import addFormats from 'ajv-formats';
import { describe, expect, it } from 'vitest';
import { listRulebooks } from '../../shared/engine';
import { apiDocument, resolveRef } from '../support/operations';

const schemas = apiDocument.components.schemas;
const choice = schemas.RulebookChoice;
const base = schemas.RulebookParams;

/** The names the schema admits for a rulebook: the `then` of its `if: id = …`. */
function admittedFor(id: string): string[] {
  const branch = (choice.allOf as any[]).find((b) => b.if?.properties?.id?.const === id);
  expect(branch, `RulebookChoice has no branch for ${id}`).toBeTruthy();
  const params = branch.then.properties.params;
  expect(params.additionalProperties, `${id}: params are closed`).toBe(false);
  return Object.keys(params.properties ?? {}).sort();
}

describe('the rulebook choice in the OpenAPI document', () => {
  it("names, for each rulebook, exactly the parameters the rulebook's info lists", () => {
    const rulebooks = listRulebooks();
    expect(resolveRef(choice.properties.id).enum.slice().sort()).toEqual(rulebooks.map((r) => r.id).sort());
    for (const r of rulebooks) expect(admittedFor(r.id), r.id).toEqual(r.parameters.map((p) => p.name).sort());
  });

  it('types every parameter as the rulebook does, bounds every string, and is closed', () => {
    expect(choice.additionalProperties).toBe(false);
    expect(base.additionalProperties).toBe(false);
    const all = listRulebooks().flatMap((r) => r.parameters);
    expect(Object.keys(base.properties).sort()).toEqual([...new Set(all.map((p) => p.name))].sort());
    for (const p of all) {
      const s = resolveRef(base.properties[p.name]);
      expect(s.type, p.name).toBe(p.type);
      if (s.type === 'string') expect(s.maxLength, p.name).toBeLessThanOrEqual(64);
      if (s.type === 'object') expect(s.additionalProperties, p.name).toBe(false);
    }
  });

  it('takes normal choices and refuses another rulebook’s parameter, an unknown one and an oversized one', () => {
    const ajv = new Ajv2020({ strict: false, allErrors: true, validateSchema: false });
    addFormats(ajv);
    ajv.addSchema({ $id: 'lotproof-api', components: apiDocument.components });
    const validate = ajv.getSchema('lotproof-api#/components/schemas/RulebookChoice')!;
    for (const ok of [
      { id: 'eu-76-211' },
      { id: 'eu-76-211', params: { nonDestructivePlan: 'single' } },
      { id: 'oiml-r87-2016', params: {} },
      { id: 'custom', params: { alpha: 0.01, alternative: 'greater', lowerLimit: { value: 480, allowed: 1 }, minimumSampleSize: 5 } },
    ]) {
      expect(validate(ok), `${JSON.stringify(ok)}: ${JSON.stringify(validate.errors)}`).toBe(true);
    }
    for (const bad of [
      { id: 'eu-76-211', params: { alpha: 0.05 } },
      { id: 'oiml-r87-2016', params: { nonDestructivePlan: 'double' } },
      { id: 'custom', params: { nonDestructivePlan: 'double' } },
      { id: 'custom', params: { notes: 'x' } },
      { id: 'eu-76-211', params: { nonDestructivePlan: 'x'.repeat(100) } },
      { id: 'custom', params: { lowerLimit: { value: 1, allowed: 0, more: [] } } },
      { id: 'custom', params: { minimumSampleSize: 2.5 } },
    ]) {
      expect(validate(bad), JSON.stringify(bad)).toBe(false);
    }
  });
});
