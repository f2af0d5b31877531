// The before and after of a change in the audit trail, as a reader takes it in: each field by its
// name on the console's forms, each value in words ("none", "on", a role's label), the alert
// recipients as who was added and who was removed. The API names fields by JSON pointer
// (`details.changes` of an AuditEvent in openapi/parts/identity.yaml).
import { ROLE_LABELS, type Role } from './navigation';

export interface AuditChange {
  field: string;
  before: unknown;
  after: unknown;
  added?: string[];
  removed?: string[];
  detail?: string;
}

const FIELD_LABELS: Record<string, string> = {
  '/sku': 'SKU',
  '/name': 'Name',
  '/description': 'Description',
  '/nominalQuantity': 'Nominal quantity',
  '/unit': 'Unit',
  '/tareMode': 'Tare mode',
  '/fixedTare': 'Fixed tare',
  '/tareUnit': 'Tare unit',
  '/density': 'Density',
  '/rulebook/id': 'Rulebook',
  '/alertRecipients': 'Alert recipients',
  '/roles': 'Roles',
  '/url': 'URL',
  '/events': 'Events',
  '/enabled': 'Sending',
  '/archivedAt': 'Archived',
};

export function fieldLabel(field: string): string {
  const param = /^\/rulebook\/params\/(.+)$/.exec(field);
  if (param) return `Rulebook parameter ${param[1]}`;
  return FIELD_LABELS[field] ?? field;
}

function valueText(field: string, v: unknown, when: (iso: string) => string): string {
  if (v === null || v === undefined || v === '') return 'none';
  if (field === '/enabled' && typeof v === 'boolean') return v ? 'on' : 'off';
  if (field === '/archivedAt' && typeof v === 'string') return when(v);
  if (Array.isArray(v)) {
    if (v.length === 0) return 'none';
    return v.map((x) => (field === '/roles' && typeof x === 'string' && x in ROLE_LABELS ? ROLE_LABELS[x as Role] : String(x))).join(', ');
  }
  if (typeof v === 'object') return JSON.stringify(v);
  return String(v);
}

/** The changes a `details` object carries, or [] when it has none (events of other kinds, older events). */
export function changesOf(details: Record<string, unknown> | undefined): AuditChange[] {
  const c = details?.changes;
  if (!Array.isArray(c)) return [];
  return c.filter((x): x is AuditChange => !!x && typeof x === 'object' && typeof (x as { field?: unknown }).field === 'string');
}

/** One line per change: "Fixed tare: 12.5 → 13"; recipients as "added a; removed b". */
export function describeChange(c: AuditChange, when: (iso: string) => string = (iso) => iso): string {
  const label = fieldLabel(c.field);
  if (c.field === '/alertRecipients' && (c.added || c.removed)) {
    const parts = [c.added?.length ? `added ${c.added.join(', ')}` : '', c.removed?.length ? `removed ${c.removed.join(', ')}` : ''].filter(Boolean);
    return `${label}: ${parts.join('; ')} (${valueText(c.field, c.before, when)} → ${valueText(c.field, c.after, when)})`;
  }
  const line = `${label}: ${valueText(c.field, c.before, when)} → ${valueText(c.field, c.after, when)}`;
  return c.detail ? `${line} (${c.detail})` : line;
}
