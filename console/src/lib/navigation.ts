// What each console role may open. The router guards with the same table the navigation shows,
// and both follow the roles the API grants each operation (x-lotproof-access in openapi/). A person
// may hold several roles: a section opens when any one of them may open it, as in the API.
export type Role = 'admin' | 'quality' | 'auditor';
/** The roles in the order the API answers them (admin, quality, auditor). */
export const ROLES: readonly Role[] = ['admin', 'quality', 'auditor'];

export interface NavItem {
  /** Route name. */
  name: string;
  label: string;
  /** Short line under the label in the section menu. */
  hint: string;
  roles: readonly Role[];
}

export const NAV_ITEMS: readonly NavItem[] = [
  { name: 'verdicts', label: 'Verdicts', hint: 'Every lot judged, filtered and exported', roles: ['admin', 'quality', 'auditor'] },
  { name: 'lot-new', label: 'Lots', hint: 'Submit a lot from a CSV file', roles: ['quality'] },
  { name: 'products', label: 'Products', hint: 'What you pack and the rulebook it follows', roles: ['quality'] },
  { name: 'audit-lookup', label: 'Seal lookup', hint: 'Re-check a verdict in this browser', roles: ['auditor'] },
  { name: 'users', label: 'Users', hint: 'Invite people and set their roles', roles: ['admin'] },
  { name: 'keys', label: 'API keys', hint: 'Credentials for plant systems', roles: ['admin'] },
  { name: 'usage', label: 'Usage', hint: 'Requests, lots and measurements per day', roles: ['admin'] },
  { name: 'webhooks', label: 'Webhooks', hint: 'Endpoints told about new verdicts', roles: ['admin'] },
  { name: 'ledger', label: 'Ledger', hint: 'Checkpoints, checks and witnesses', roles: ['admin', 'auditor'] },
  { name: 'audit-trail', label: 'Audit trail', hint: 'Who did what, and when', roles: ['admin', 'auditor'] },
];

/** One role (as older callers pass it) or several, as a list. */
function asList(roles: Role | readonly Role[] | undefined | null): readonly Role[] {
  if (!roles) return [];
  return typeof roles === 'string' ? [roles] : roles;
}

/** True when any one of the held roles is among those a section or route admits. */
export function mayOpen(admits: readonly Role[], held: Role | readonly Role[] | undefined | null): boolean {
  return asList(held).some((r) => admits.includes(r));
}

export function navigationFor(roles: Role | readonly Role[] | undefined | null): NavItem[] {
  return NAV_ITEMS.filter((item) => mayOpen(item.roles, roles));
}

/** Where a person lands after signing in: the first section their roles open. */
export function homeFor(roles: Role | readonly Role[] | undefined | null): string {
  return navigationFor(roles)[0]?.name ?? 'sign-in';
}

export const ROLE_LABELS: Record<Role, string> = {
  admin: 'Admin',
  quality: 'Quality engineer',
  auditor: 'Auditor',
};

/** Several roles in one label, in the order of ROLES ("Quality engineer · Auditor"). */
export function rolesLabel(roles: Role | readonly Role[] | undefined | null): string {
  const held = asList(roles);
  return ROLES.filter((r) => held.includes(r)).map((r) => ROLE_LABELS[r]).join(' · ');
}
