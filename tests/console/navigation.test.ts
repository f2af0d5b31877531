// Which sections each role, and each set of roles, sees; the router guards with the same table.
// A person may hold several roles (issue 16): they see every section any one of them opens, as the
// API lets a session through when any one of its roles is allowed (DEVELOPERS.md, x-lotproof-access).
import { describe, expect, it } from 'vitest';
import { homeFor, mayOpen, NAV_ITEMS, navigationFor, rolesLabel } from '../../console/src/lib/navigation';

const names = (roles: Parameters<typeof navigationFor>[0]) => navigationFor(roles).map((i) => i.name);

describe('navigationFor', () => {
  it('gives an admin verdicts, users, keys, usage, webhooks, the ledger (its witnesses) and the audit trail only', () => {
    expect(names(['admin'])).toEqual(['verdicts', 'users', 'keys', 'usage', 'webhooks', 'ledger', 'audit-trail']);
  });
  it('gives a quality engineer verdicts, lots and products only', () => {
    expect(names(['quality'])).toEqual(['verdicts', 'lot-new', 'products']);
  });
  it('gives an auditor verdicts, the seal lookup, the ledger and the audit trail only', () => {
    expect(names(['auditor'])).toEqual(['verdicts', 'audit-lookup', 'ledger', 'audit-trail']);
  });
  it('gives several roles every section any one of them opens, each once, in the menu’s order', () => {
    expect(names(['quality', 'auditor'])).toEqual(['verdicts', 'lot-new', 'products', 'audit-lookup', 'ledger', 'audit-trail']);
    // an independent any-of over the same table
    for (const set of [['admin', 'quality'], ['admin', 'auditor'], ['admin', 'quality', 'auditor']] as const) {
      expect(names(set), set.join('+')).toEqual(NAV_ITEMS.filter((i) => set.some((r) => i.roles.includes(r))).map((i) => i.name));
    }
    expect(names('quality')).toEqual(names(['quality']));
  });
  it('opens a route to any one of its roles', () => {
    expect(mayOpen(['admin', 'auditor'], ['quality', 'auditor'])).toBe(true);
    expect(mayOpen(['admin'], ['quality', 'auditor'])).toBe(false);
    expect(mayOpen(['admin'], [])).toBe(false);
  });
  it('gives no sections without a role, and sends that caller to sign-in', () => {
    expect(names(null)).toEqual([]);
    expect(names([])).toEqual([]);
    expect(homeFor(null)).toBe('sign-in');
    expect(homeFor(['admin'])).toBe('verdicts');
  });
  it('names several roles in one label', () => {
    expect(rolesLabel(['quality'])).toBe('Quality engineer');
    expect(rolesLabel(['auditor', 'quality'])).toBe('Quality engineer · Auditor');
  });
});
