import type { Migration } from '../db/migrate';

// Validity windows of the seal signing keys (issue 15): a key signs nothing dated before `nbf` or
// at or after `exp`; a compromised key is revoked from a time (`revoked_from`, with a reason) and
// its `exp` moves back to that time. Windows are whole seconds, as /.well-known/jwks.json publishes
// them (RFC 7519 NumericDate).
//
// Backfill: a key's nbf is the earlier of its publication and the first verdict it signed. Every key
// but the newest has been rotated out by now, so it gets an exp: when the next key was published,
// but never before the last verdict it signed (a window must hold every seal it already made).
export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    ALTER TABLE signing_keys
      ADD COLUMN nbf timestamptz,
      ADD COLUMN exp timestamptz,
      ADD COLUMN revoked_from timestamptz,
      ADD COLUMN revocation_reason text CHECK (length(revocation_reason) BETWEEN 1 AND 500),
      ADD CHECK ((revoked_from IS NULL) = (revocation_reason IS NULL)),
      ADD CHECK (revoked_from IS NULL OR exp <= revoked_from);

    WITH signed AS (
      SELECT k.kid, k.created_at,
             (SELECT min(v.recorded_at) FROM verdicts v WHERE v.kid = k.kid) AS first_signed,
             (SELECT max(v.recorded_at) FROM verdicts v WHERE v.kid = k.kid) AS last_signed,
             lead(k.created_at) OVER (ORDER BY k.created_at, k.kid) AS next_published
      FROM signing_keys k
    )
    UPDATE signing_keys k SET
      nbf = date_trunc('second', LEAST(s.created_at, COALESCE(s.first_signed, s.created_at))),
      exp = CASE WHEN s.next_published IS NULL THEN NULL
                 ELSE date_trunc('second', GREATEST(s.next_published, s.last_signed)) + interval '1 second' END
    FROM signed s WHERE s.kid = k.kid;

    ALTER TABLE signing_keys
      ALTER COLUMN nbf SET NOT NULL,
      ALTER COLUMN nbf SET DEFAULT date_trunc('second', now());

    -- A key's row only ever gains an exp or a revocation, and only from the owner's side (the CLI):
    -- the app's role has SELECT and INSERT on this table and nothing else (server/db/privileges.ts).
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    ALTER TABLE signing_keys DROP COLUMN nbf, DROP COLUMN exp, DROP COLUMN revoked_from, DROP COLUMN revocation_reason;
  `);
};
