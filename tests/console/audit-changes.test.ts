// The audit trail's before → after lines (console/src/lib/auditChanges.ts), from change entries in
// the shape openapi/parts/identity.yaml documents for AuditEvent.details.changes.
import { describe, expect, it } from 'vitest';
import { changesOf, describeChange } from '../../console/src/lib/auditChanges';

describe('audit trail changes', () => {
  it('reads each changed field as its label, before → after', () => {
    expect(describeChange({ field: '/fixedTare', before: 12.5, after: 13 })).toBe('Fixed tare: 12.5 → 13');
    expect(describeChange({ field: '/rulebook/params/alpha', before: 0.05, after: null })).toBe('Rulebook parameter alpha: 0.05 → none');
    expect(describeChange({ field: '/roles', before: ['auditor'], after: ['admin', 'auditor'] })).toBe('Roles: Auditor → Admin, Auditor');
    expect(describeChange({ field: '/enabled', before: true, after: false })).toBe('Sending: on → off');
    expect(describeChange({ field: '/archivedAt', before: null, after: '2025-03-01T10:00:00.000Z' }, () => '1 March')).toBe('Archived: none → 1 March');
  });
  it('names an alert-recipient change as such, with who was added and who removed', () => {
    expect(describeChange({ field: '/alertRecipients', before: ['a@x.example'], after: ['b@x.example'], added: ['b@x.example'], removed: ['a@x.example'] })).toBe(
      'Alert recipients: added b@x.example; removed a@x.example (a@x.example → b@x.example)',
    );
  });
  it('finds no changes in events without them', () => {
    expect(changesOf({ email: 'a@x.example', from: 'quality', to: 'auditor' })).toEqual([]);
    expect(changesOf(undefined)).toEqual([]);
    expect(changesOf({ changes: [{ field: '/name', before: 'A', after: 'B' }, 'junk'] })).toHaveLength(1);
  });
});
