// What each console role may open. The router guards with the same table the navigation shows,
// and both follow the roles the API grants each operation (x-lotproof-access in openapi/).
export type Role = 'admin' | 'quality' | 'auditor';

export interface NavItem {
  /** Route name. */
  name: string;
  label: string;
  /** Short line under the label in the section menu. */
  hint: string;
  roles: readonly Role[];
}

export const NAV_ITEMS: readonly NavItem[] = [
  { name: 'verdicts', label: 'Verdicts', hint: 'Every lot judged, filtered and exported', roles: ['quality', 'auditor'] },
  { name: 'lot-new', label: 'Lots', hint: 'Submit a lot from a CSV file', roles: ['quality'] },
  { name: 'products', label: 'Products', hint: 'What you pack and the rulebook it follows', roles: ['quality'] },
  { name: 'audit-lookup', label: 'Seal lookup', hint: 'Re-check a verdict in this browser', roles: ['auditor'] },
  { name: 'ledger', label: 'Ledger', hint: 'Walk the hash chain end to end', roles: ['auditor'] },
  { name: 'users', label: 'Users', hint: 'Invite people and set their roles', roles: ['admin'] },
  { name: 'keys', label: 'API keys', hint: 'Credentials for plant systems', roles: ['admin'] },
  { name: 'usage', label: 'Usage', hint: 'Requests, lots and measurements per day', roles: ['admin'] },
  { name: 'webhooks', label: 'Webhooks', hint: 'Endpoints told about new verdicts', roles: ['admin'] },
  { name: 'audit-trail', label: 'Audit trail', hint: 'Who did what, and when', roles: ['admin', 'auditor'] },
];

export function navigationFor(role: Role | undefined | null): NavItem[] {
  if (!role) return [];
  return NAV_ITEMS.filter((item) => item.roles.includes(role));
}

/** Where a role lands after signing in. */
export function homeFor(role: Role | undefined | null): string {
  return navigationFor(role)[0]?.name ?? 'sign-in';
}

export const ROLE_LABELS: Record<Role, string> = {
  admin: 'Admin',
  quality: 'Quality engineer',
  auditor: 'Auditor',
};
