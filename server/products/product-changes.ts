// What a product change changed, field by field, for the audit trail: the before and after of each
// field that differs, named by its JSON pointer as in the API (`/fixedTare`, `/rulebook/id`, one
// entry per rulebook parameter, `/alertRecipients` with who was added and who was removed).
export interface ProductFields {
  sku: string | null;
  name: string | null;
  description: string;
  nominalQuantity: number | null;
  unit: string | null;
  tareMode: string | null;
  fixedTare: number | null;
  tareUnit: string | null;
  density: number | null;
  rulebook: { id: string | null; params?: Record<string, unknown> };
  alertRecipients: string[];
  /** The plausible band in force (the default when the product sets none). */
  plausibility: { minFraction: number; maxFraction: number } | null;
}

export interface FieldChange {
  field: string;
  before: unknown;
  after: unknown;
  /** For the alert recipients: the addresses that came and went. */
  added?: string[];
  removed?: string[];
}

/** A product before it was made: "before" of every field of a created product. */
export const NO_PRODUCT: ProductFields = {
  sku: null,
  name: null,
  description: '',
  nominalQuantity: null,
  unit: null,
  tareMode: null,
  fixedTare: null,
  tareUnit: null,
  density: null,
  rulebook: { id: null },
  alertRecipients: [],
  plausibility: null,
};

/** The field an archive changes. */
export const ARCHIVED = '/archivedAt';

const SCALARS = ['sku', 'name', 'description', 'nominalQuantity', 'unit', 'tareMode', 'fixedTare', 'tareUnit', 'density', 'plausibility'] as const;

// Values here are JSON (numbers, strings, small objects of rulebook parameters), so equal JSON is equal.
const same = (a: unknown, b: unknown) => JSON.stringify(a) === JSON.stringify(b);

/** Each field that differs between two states of a product, in the order of the API's schema. */
export function fieldChanges(before: ProductFields, after: ProductFields): FieldChange[] {
  const out: FieldChange[] = [];
  for (const k of SCALARS) if (!same(before[k], after[k])) out.push({ field: `/${k}`, before: before[k], after: after[k] });
  if (before.rulebook.id !== after.rulebook.id) out.push({ field: '/rulebook/id', before: before.rulebook.id, after: after.rulebook.id });
  const [was, is] = [before.rulebook.params ?? {}, after.rulebook.params ?? {}];
  // parameter names sorted: the stored object's key order is PostgreSQL's (jsonb), not the request's
  for (const name of [...new Set([...Object.keys(was), ...Object.keys(is)])].sort()) {
    if (!same(was[name], is[name])) out.push({ field: `/rulebook/params/${name}`, before: was[name] ?? null, after: is[name] ?? null });
  }
  if (!same(before.alertRecipients, after.alertRecipients)) {
    out.push({
      field: '/alertRecipients',
      before: before.alertRecipients,
      after: after.alertRecipients,
      added: after.alertRecipients.filter((e) => !before.alertRecipients.includes(e)),
      removed: before.alertRecipients.filter((e) => !after.alertRecipients.includes(e)),
    });
  }
  return out;
}
