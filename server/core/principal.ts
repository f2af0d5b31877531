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
  /** Role of a console user; undefined for an API key. */
  role?: Role;
  keyId?: string;
  userId?: string;
  sessionId?: string;
}
