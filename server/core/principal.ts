// Who is calling: the result of authentication, handed to services instead of the request.
export const SCOPES = ['lots:submit', 'verdicts:read', 'products:write', 'audit:read', 'keys:manage'] as const;
export type Scope = (typeof SCOPES)[number];
export const ROLES = ['admin', 'quality', 'auditor'] as const;
export type Role = (typeof ROLES)[number];

export interface Principal {
  organisationId: string;
  kind: 'api-key' | 'session';
  /** Scopes of an API key; empty for a session. */
  scopes: Scope[];
  /** Roles of a console user (one or more); absent or empty for an API key. */
  roles?: Role[];
  keyId?: string;
  userId?: string;
  sessionId?: string;
}

/** Roles without repeats, in the order of ROLES, so equal sets compare and read alike everywhere. */
export function sortedRoles(roles: readonly string[]): Role[] {
  return ROLES.filter((r) => roles.includes(r));
}

/**
 * The one role older clients read (`role` beside `roles` in the API): the first of the roles in
 * the order of ROLES. It says less than `roles` and decides nothing on the server.
 */
export function primaryRole(roles: readonly string[]): Role {
  // never empty for a user or an invitation: the database refuses an empty list (migration 0104)
  return sortedRoles(roles)[0] ?? 'auditor';
}

/** True when the principal holds any one of the roles. */
export function holdsAnyRole(p: Pick<Principal, 'roles'>, roles: readonly string[]): boolean {
  return (p.roles ?? []).some((r) => roles.includes(r));
}
