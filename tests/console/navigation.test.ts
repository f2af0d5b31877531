// Which sections each role sees; the router guards with the same table.
import { describe, expect, it } from 'vitest';
import { homeFor, navigationFor } from '../../console/src/lib/navigation';

const names = (role: Parameters<typeof navigationFor>[0]) => navigationFor(role).map((i) => i.name);

describe('navigationFor', () => {
  it('gives an admin users, keys, usage, webhooks and the audit trail only', () => {
    expect(names('admin')).toEqual(['users', 'keys', 'usage', 'webhooks', 'audit-trail']);
  });
  it('gives a quality engineer verdicts, lots and products only', () => {
    expect(names('quality')).toEqual(['verdicts', 'lot-new', 'products']);
  });
  it('gives an auditor verdicts, the seal lookup, the ledger and the audit trail only', () => {
    expect(names('auditor')).toEqual(['verdicts', 'audit-lookup', 'ledger', 'audit-trail']);
  });
  it('gives no sections without a role, and sends that caller to sign-in', () => {
    expect(names(null)).toEqual([]);
    expect(homeFor(null)).toBe('sign-in');
    expect(homeFor('admin')).toBe('users');
  });
});
