import type { Migration } from '../db/migrate';

// A person may hold more than one role (issue 16): users.role and invitations.role become a list,
// each row's one role its only member. The list is never empty, holds only known roles and no NULL
// (the server keeps it without repeats, in the order admin, quality, auditor).
const KNOWN = "ARRAY['admin', 'quality', 'auditor']::text[]";
const rolesCheck = (table: string) => `
    ALTER TABLE ${table} ADD COLUMN roles text[];
    UPDATE ${table} SET roles = ARRAY[role];
    ALTER TABLE ${table} ALTER COLUMN roles SET NOT NULL,
      ADD CONSTRAINT ${table}_roles_known CHECK (cardinality(roles) >= 1 AND array_position(roles, NULL) IS NULL AND roles <@ ${KNOWN}),
      DROP COLUMN role;`;

export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`${rolesCheck('users')}${rolesCheck('invitations')}`);
};

// Back to one role each: the first in the order admin, quality, auditor.
const oneRole = (table: string) => `
    ALTER TABLE ${table} ADD COLUMN role text;
    UPDATE ${table} SET role = CASE WHEN 'admin' = ANY(roles) THEN 'admin' WHEN 'quality' = ANY(roles) THEN 'quality' ELSE 'auditor' END;
    ALTER TABLE ${table} ALTER COLUMN role SET NOT NULL, ADD CHECK (role IN ('admin', 'quality', 'auditor')), DROP COLUMN roles;`;

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`${oneRole('users')}${oneRole('invitations')}`);
};
