// The forms' logic: the verdict list's sorts and day boundaries, and
// the product form checked with the API's own ProductInput schema (openapi/parts/verdicts.yaml).
import { describe, expect, it } from 'vitest';
import { mount } from '@vue/test-utils';
import { nextTick } from 'vue';
import { dayBoundary, nextSort, SORTS } from '../../console/src/lib/verdictFilters';
import { finderApiQuery, finderFromQuery, NO_FILTERS } from '../../console/src/components/verdicts/lotFinder';
import { crossFieldErrors, draftOf, emptyDraft, productInputOf } from '../../console/src/lib/productForm';
import { placeErrors, plainFieldMessage, validateProductInput, validateWebhookInput } from '../../console/src/lib/formValidation';
import { fieldErrors } from '../../console/src/api/problem';
import Ajv from 'ajv';
import addFormats from 'ajv-formats';
import { createPinia } from 'pinia';
import { createMemoryHistory, createRouter } from 'vue-router';
import ProductFormView from '../../console/src/views/ProductFormView.vue';

describe('verdict filters', () => {
  it('gives a day filter the first instant of its day, and of the next day for an inclusive end', () => {
    const from = new Date(dayBoundary('2025-03-31'));
    const to = new Date(dayBoundary('2025-03-31', true));
    expect([from.getMonth(), from.getDate(), from.getHours()]).toEqual([2, 31, 0]);
    expect([to.getMonth(), to.getDate(), to.getHours()]).toEqual([3, 1, 0]);
  });

  it('sends the sort to listVerdicts (not the default), and a heading flips it', () => {
    expect(finderApiQuery({ ...NO_FILTERS, sort: 'decision' }, { cursor: null, limit: 25, counts: true }).sort).toBe('decision');
    expect(finderApiQuery(NO_FILTERS, { cursor: null, limit: 25, counts: true }).sort).toBeUndefined();
    expect(finderFromQuery({ sort: '-decision' }).sort).toBe('-decision');
    expect(finderFromQuery({ sort: 'sequence' }).sort).toBe('-recordedAt');
    expect(SORTS).toHaveLength(8);
    expect(nextSort('-recordedAt', 'recordedAt')).toBe('recordedAt');
    expect(nextSort('recordedAt', 'recordedAt')).toBe('-recordedAt');
    expect(nextSort('-recordedAt', 'packedAt')).toBe('-packedAt');
    expect(nextSort('-recordedAt', 'lotCode')).toBe('lotCode');
    expect(nextSort('lotCode', 'lotCode')).toBe('-lotCode');
    expect(nextSort('-lotCode', 'decision')).toBe('decision');
  });
});

describe('product form', () => {
  const good = { ...emptyDraft(), sku: 'OATS-500G', name: 'Rolled oats 500 g', nominalQuantity: '500', tareMode: 'fixed' as const, fixedTare: '14' };

  it('sends a ProductInput the API schema accepts', () => {
    const input = productInputOf(good);
    expect(input).toMatchObject({ sku: 'OATS-500G', nominalQuantity: 500, fixedTare: 14, rulebook: { id: 'eu-76-211' }, alertRecipients: [] });
    expect(validateProductInput(input)).toEqual({});
  });

  it('sends the UK single plan as a parameter of eu-76-211 only, and reads it back', () => {
    expect(productInputOf(good).rulebook).toEqual({ id: 'eu-76-211' });
    const single = productInputOf({ ...good, nonDestructivePlan: 'single' });
    expect(single.rulebook).toEqual({ id: 'eu-76-211', params: { nonDestructivePlan: 'single' } });
    expect(validateProductInput(single)).toEqual({});
    expect(productInputOf({ ...good, rulebook: 'oiml-r87-2016', nonDestructivePlan: 'single' }).rulebook).toEqual({ id: 'oiml-r87-2016' });
    const stored = { ...single, id: 'p1', description: '', fixedTare: 14, tareUnit: null, density: null, createdAt: '', updatedAt: '' };
    expect(draftOf(stored as never).nonDestructivePlan).toBe('single');
  });

  it('names each bad field in words, by its pointer, in a sentence that says which field', () => {
    const errors = validateProductInput(productInputOf({ ...good, sku: 'no spaces allowed', name: '', nominalQuantity: '0', alertRecipients: 'qa@plant.example, not-an-address' }));
    expect(errors).toEqual({
      '/sku': 'Check the SKU code: it may use letters, digits, dots, dashes or underscores, starts with a letter or digit and has at most 64 characters.',
      '/name': 'Enter the name.',
      '/nominalQuantity': 'The nominal quantity must be more than 0.',
      '/alertRecipients/1': 'The 2nd of the alert recipients is not an e-mail address.',
    });
  });

  it('keeps text that is not a number, so the schema asks for a number', () => {
    expect(validateProductInput(productInputOf({ ...good, nominalQuantity: 'five hundred' }))['/nominalQuantity']).toBe('Enter the nominal quantity as a number.');
  });

  it('reads a decimal comma and asks for the tare of a fixed tare mode', () => {
    expect(productInputOf({ ...good, nominalQuantity: '0,75' }).nominalQuantity).toBe(0.75);
    expect(crossFieldErrors({ ...good, fixedTare: '' })).toEqual({ '/fixedTare': 'A fixed tare mode needs the tare of one pack.' });
  });

  it('checks a webhook address against WebhookInput', () => {
    expect(validateWebhookInput({ url: 'ftp://x.example', events: ['verdict.created'] })['/url']).toBe('Check the address: it starts with http:// or https://.');
    expect(validateWebhookInput({ url: 'https://mes.example/hook', events: [] })['/events']).toBe('Choose at least one of the events.');
  });
});

describe('the server’s field messages in the user’s words', () => {
  // The server's validator (express-openapi-validator) passes on Ajv 8's English messages; they are
  // produced here by Ajv itself (the `ajv` package the server uses), not written from memory.
  const ajv = new Ajv({ allErrors: true });
  addFormats(ajv);
  const validate = ajv.compile({
    type: 'object',
    required: ['name', 'lotSize'],
    properties: {
      name: { type: 'string', minLength: 3, maxLength: 5 },
      email: { type: 'string', format: 'email' },
      lotSize: { type: 'integer', minimum: 1 },
      density: { type: 'number', exclusiveMinimum: 0 },
      role: { enum: ['admin', 'quality', 'auditor'] },
      events: { type: 'array', minItems: 1 },
    },
  });
  const messages = (value: unknown) => {
    validate(value);
    return (validate.errors ?? []).map((e) => ({ pointer: e.instancePath, detail: e.message ?? '' }));
  };

  it('reads each of Ajv’s messages back into a sentence naming the field', () => {
    const found = messages({ name: 'ab', email: 'nope', lotSize: 0, density: 0, role: 'boss', events: [] });
    const plain = Object.fromEntries(found.map((f) => [f.pointer, plainFieldMessage(f.pointer, f.detail)]));
    expect(found.find((f) => f.pointer === '/name')!.detail).toMatch(/^must NOT have fewer than 3 characters$/);
    expect(plain).toEqual({
      '/name': 'The name needs at least 3 characters.',
      '/email': 'The e-mail address is not an e-mail address.',
      '/lotSize': 'The lot size must be at least 1.',
      '/density': 'The density must be more than 0.',
      '/role': 'Choose the role from the list.',
      '/events': 'Choose at least one of the events.',
    });
    for (const text of Object.values(plain)) expect(text).not.toMatch(/must NOT|must have required|must match|must be [<>=]|must be equal/);
  });

  it('says which field is missing or too long, and keeps a message the rules wrote for people', () => {
    const missing = messages({ name: 'abcdef' });
    const required = missing.find((f) => /required/.test(f.detail))!;
    expect(plainFieldMessage(required.pointer, required.detail)).toBe('Enter the lot size.');
    const long = missing.find((f) => f.pointer === '/name')!;
    expect(plainFieldMessage(long.pointer, long.detail)).toBe('The name can have at most 5 characters.');
    expect(plainFieldMessage('/lotCode', 'Lot L-7 of this product already has a verdict.')).toBe('Lot L-7 of this product already has a verdict.');
  });

  it('fieldErrors turns a problem’s validator messages into plain ones', () => {
    const [bad] = messages({ name: 'ab', lotSize: 3 });
    const errors = fieldErrors({ type: 'about:blank', title: 'Request is not valid', status: 400, errors: [{ pointer: `/body${bad!.pointer}`, detail: bad!.detail }] });
    expect(errors).toEqual({ '/name': 'The name needs at least 3 characters.' });
  });
});

describe('a form’s error count', () => {
  it('places each error on one field: items on their list, nested pointers on their field, the rest apart', () => {
    const placed = placeErrors(
      { '/alertRecipients/1': 'a', '/alertRecipients/3': 'b', '/rulebook': 'c', '/rulebook/params/minimumSampleSize': 'd', '/tareUnit': 'e' },
      { '/alertRecipients': ['/alertRecipients'], '/rulebook/params/alpha': ['/rulebook/params/alpha', '/rulebook'], '/rulebook/params/minimumSampleSize': ['/rulebook/params/minimumSampleSize'] },
    );
    expect(placed.byField).toEqual({ '/alertRecipients': 'a b', '/rulebook/params/alpha': 'c', '/rulebook/params/minimumSampleSize': 'd' });
    expect(placed.unplaced).toEqual(['e']);
    expect(placed.count).toBe(3);
  });

  it('the product form says as many fields need attention as it marks', async () => {
    const router = createRouter({ history: createMemoryHistory(), routes: [{ path: '/', name: 'products', component: { template: '<p/>' } }] });
    const wrapper = mount(ProductFormView, { global: { plugins: [createPinia(), router] }, attachTo: document.body });
    await wrapper.find('#p-sku').setValue('no spaces');
    await wrapper.find('#p-qn').setValue('0');
    await wrapper.find('#p-alerts').setValue('not-an-address, also-wrong, qa@plant.example');
    await wrapper.find('form').trigger('submit');
    await nextTick();
    const marked = wrapper.findAll('[data-field-error]');
    const summary = wrapper.find('[data-form-summary]').text();
    // sku, name (left empty), Qn, and the alert recipients (two bad addresses, one field).
    expect(marked.length).toBe(4);
    expect(summary).toMatch(/^4 fields need attention/);
    expect(wrapper.find('#p-alerts-error').text()).toBe('The 1st of the alert recipients is not an e-mail address. The 2nd of the alert recipients is not an e-mail address.');
    wrapper.unmount();
  });
});
