// The forms' logic: verdict filters to and from the address and the list operation's query, and
// the product form checked with the API's own ProductInput schema (openapi/parts/verdicts.yaml).
import { describe, expect, it } from 'vitest';
import { mount } from '@vue/test-utils';
import { nextTick } from 'vue';
import { apiQuery, EMPTY_FILTERS, filterProblem, filtersFromQuery, nextSort, queryFromFilters, SORTS } from '../../console/src/lib/verdictFilters';
import { crossFieldErrors, draftOf, emptyDraft, productInputOf } from '../../console/src/lib/productForm';
import { validateProductInput, validateWebhookInput } from '../../console/src/lib/formValidation';
import FilterBar from '../../console/src/components/FilterBar.vue';

describe('verdict filters', () => {
  it('round-trips through the address and drops malformed values', () => {
    const f = filtersFromQuery({ decision: 'nonconforming', from: '2025-03-01', to: 'yesterday', lot: ' L-7 ', sort: 'lotCode', junk: 'x' });
    expect(f).toEqual({ ...EMPTY_FILTERS, decision: 'nonconforming', from: '2025-03-01', lotCode: ' L-7 ', sort: 'lotCode' });
    expect(queryFromFilters(f)).toEqual({ decision: 'nonconforming', from: '2025-03-01', lot: 'L-7', sort: 'lotCode' });
    expect(filtersFromQuery({ decision: 'approved' }).decision).toBe('');
  });

  it('asks listVerdicts with its own parameter names, the to-day inclusive', () => {
    const q = apiQuery({ ...EMPTY_FILTERS, productId: 'p1', line: 'Line 2', from: '2025-03-01', to: '2025-03-31' }, 'c9');
    expect(Object.keys(q).sort()).toEqual(['cursor', 'from', 'limit', 'line', 'productId', 'to']);
    expect(new Date(String(q.to)).getDate()).toBe(1); // the first instant of 1 April, local time
    expect(new Date(String(q.to)).getMonth()).toBe(3);
  });

  it('refuses a range whose start is after its end', () => {
    expect(filterProblem({ ...EMPTY_FILTERS, from: '2025-04-02', to: '2025-04-01' })).toMatch(/after/);
    expect(filterProblem({ ...EMPTY_FILTERS, from: '2025-04-01', to: '2025-04-01' })).toBeNull();
  });

  it('sends the sort to listVerdicts (not the default), and a heading flips it', () => {
    expect(apiQuery({ ...EMPTY_FILTERS, sort: 'decision' }).sort).toBe('decision');
    expect(apiQuery(EMPTY_FILTERS).sort).toBeUndefined();
    expect(filtersFromQuery({ sort: '-decision' }).sort).toBe('-decision');
    expect(filtersFromQuery({ sort: 'sequence' }).sort).toBe('-recordedAt');
    expect(SORTS).toHaveLength(8);
    expect(nextSort('-recordedAt', 'recordedAt')).toBe('recordedAt');
    expect(nextSort('recordedAt', 'recordedAt')).toBe('-recordedAt');
    expect(nextSort('-recordedAt', 'packedAt')).toBe('-packedAt');
    expect(nextSort('-recordedAt', 'lotCode')).toBe('lotCode');
    expect(nextSort('lotCode', 'lotCode')).toBe('-lotCode');
    expect(nextSort('-lotCode', 'decision')).toBe('decision');
  });

  it('FilterBar emits the whole set on Apply, and not while the range is backwards', async () => {
    const wrapper = mount(FilterBar, { props: { modelValue: { ...EMPTY_FILTERS }, products: [] }, attachTo: document.body });
    await wrapper.find('#f-line').setValue('Line 4');
    await wrapper.find('#f-from').setValue('2025-05-10');
    await wrapper.find('#f-to').setValue('2025-05-01');
    await nextTick();
    expect(wrapper.find('[role="alert"]').text()).toMatch(/after/);
    await wrapper.find('form').trigger('submit');
    expect(wrapper.emitted('update:modelValue')).toBeUndefined();
    await wrapper.find('#f-to').setValue('2025-05-31');
    await wrapper.find('form').trigger('submit');
    expect(wrapper.emitted('update:modelValue')?.[0]?.[0]).toMatchObject({ line: 'Line 4', from: '2025-05-10', to: '2025-05-31' });
    wrapper.unmount();
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

  it('names each bad field in words, by its pointer', () => {
    const errors = validateProductInput(productInputOf({ ...good, sku: 'no spaces allowed', name: '', nominalQuantity: '0', alertRecipients: 'qa@plant.example, not-an-address' }));
    expect(errors).toEqual({
      '/sku': 'Use letters, digits, dots, dashes or underscores, starting with a letter or digit (at most 64).',
      '/name': 'Required.',
      '/nominalQuantity': 'Must be greater than 0.',
      '/alertRecipients/1': 'Not an e-mail address.',
    });
  });

  it('keeps text that is not a number, so the schema says "Enter a number"', () => {
    expect(validateProductInput(productInputOf({ ...good, nominalQuantity: 'five hundred' }))['/nominalQuantity']).toBe('Enter a number.');
  });

  it('reads a decimal comma and asks for the tare of a fixed tare mode', () => {
    expect(productInputOf({ ...good, nominalQuantity: '0,75' }).nominalQuantity).toBe(0.75);
    expect(crossFieldErrors({ ...good, fixedTare: '' })).toEqual({ '/fixedTare': 'A fixed tare mode needs the tare of one pack.' });
  });

  it('checks a webhook address against WebhookInput', () => {
    expect(validateWebhookInput({ url: 'ftp://x.example', events: ['verdict.created'] })['/url']).toBe('Start the address with http:// or https://.');
    expect(validateWebhookInput({ url: 'https://mes.example/hook', events: [] })['/events']).toBe('Choose at least one.');
  });
});
