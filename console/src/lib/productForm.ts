// The product form's draft (what the inputs hold, as typed) and the ProductInput it sends.
// Numbers typed as text stay text when they are not numbers, so the schema check names them.
import type { components } from '../../../shared/api/schema';

type ProductInput = components['schemas']['ProductInput'];
type Product = components['schemas']['Product'];
type Unit = components['schemas']['Unit'];
type TareMode = components['schemas']['TareMode'];
type RulebookId = ProductInput['rulebook']['id'];

export interface ProductDraft {
  sku: string;
  name: string;
  description: string;
  nominalQuantity: string;
  unit: Unit;
  tareMode: TareMode;
  fixedTare: string;
  tareUnit: Unit | '';
  density: string;
  rulebook: RulebookId;
  /** eu-76-211: the Directive's double plan, or the UK single plan (SI 2006/659 Sch. 2 para 3.3–3.5). */
  nonDestructivePlan: 'double' | 'single';
  /** Custom rulebook: significance level and smallest sample. */
  alpha: string;
  minimumSampleSize: string;
  alertRecipients: string;
}

export function emptyDraft(): ProductDraft {
  return { sku: '', name: '', description: '', nominalQuantity: '', unit: 'g', tareMode: 'none', fixedTare: '', tareUnit: '', density: '', rulebook: 'eu-76-211', nonDestructivePlan: 'double', alpha: '', minimumSampleSize: '', alertRecipients: '' };
}

export function draftOf(p: Product): ProductDraft {
  const params = (p.rulebook.params ?? {}) as { alpha?: number; minimumSampleSize?: number; nonDestructivePlan?: string };
  return {
    sku: p.sku,
    name: p.name,
    description: p.description,
    nominalQuantity: String(p.nominalQuantity),
    unit: p.unit,
    tareMode: p.tareMode,
    fixedTare: p.fixedTare === null ? '' : String(p.fixedTare),
    tareUnit: p.tareUnit ?? '',
    density: p.density === null ? '' : String(p.density),
    rulebook: p.rulebook.id,
    nonDestructivePlan: params.nonDestructivePlan === 'single' ? 'single' : 'double',
    alpha: params.alpha === undefined ? '' : String(params.alpha),
    minimumSampleSize: params.minimumSampleSize === undefined ? '' : String(params.minimumSampleSize),
    alertRecipients: p.alertRecipients.join(', '),
  };
}

/** A typed number: a number when it reads as one, else the text itself (so validation says so). */
function num(text: string): number | string {
  const t = text.trim().replace(',', '.');
  return t !== '' && Number.isFinite(Number(t)) ? Number(t) : text.trim();
}

export function productInputOf(d: ProductDraft): ProductInput {
  const input: Record<string, unknown> = {
    sku: d.sku.trim(),
    name: d.name.trim(),
    nominalQuantity: d.nominalQuantity.trim() === '' ? undefined : num(d.nominalQuantity),
    unit: d.unit,
    tareMode: d.tareMode,
    rulebook: { id: d.rulebook },
  };
  if (input.nominalQuantity === undefined) delete input.nominalQuantity;
  if (d.description.trim()) input.description = d.description.trim();
  if (d.tareMode === 'fixed') input.fixedTare = d.fixedTare.trim() === '' ? null : num(d.fixedTare);
  if (d.tareMode !== 'none' && d.tareUnit) input.tareUnit = d.tareUnit;
  if (d.density.trim()) input.density = num(d.density);
  if (d.rulebook === 'eu-76-211' && d.nonDestructivePlan === 'single') {
    (input.rulebook as Record<string, unknown>).params = { nonDestructivePlan: 'single' };
  }
  if (d.rulebook === 'custom') {
    const params: Record<string, unknown> = {};
    if (d.alpha.trim()) params.alpha = num(d.alpha);
    if (d.minimumSampleSize.trim()) params.minimumSampleSize = num(d.minimumSampleSize);
    if (Object.keys(params).length) (input.rulebook as Record<string, unknown>).params = params;
  }
  const recipients = d.alertRecipients.split(/[\s,;]+/).filter(Boolean);
  input.alertRecipients = recipients;
  return input as unknown as ProductInput;
}

/** Rules the schema cannot say (they join two fields), in the same pointer-keyed form. */
export function crossFieldErrors(d: ProductDraft): Record<string, string> {
  const out: Record<string, string> = {};
  if (d.tareMode === 'fixed' && d.fixedTare.trim() === '') out['/fixedTare'] = 'A fixed tare mode needs the tare of one pack.';
  if (d.rulebook === 'custom' && d.alpha.trim()) {
    const a = Number(d.alpha.replace(',', '.'));
    if (!(a > 0 && a < 1)) out['/rulebook/params/alpha'] = 'The significance level is a number between 0 and 1, e.g. 0.05.';
  }
  return out;
}
