import type { Migration } from '../db/migrate';

// A key made by a key (scope keys:manage) records its parent: revoking the parent revokes it (and
// its own children) in the same transaction, and it expires no later than its parent.
//
// Keys made by keys before this migration name their parent in created_by (a user's id otherwise):
// they get the link, and are brought under the same rule — each change in its organisation's audit
// trail, by the operator: a key whose parent (or an ancestor) is revoked or has expired is revoked
// now; a key that would outlive its parent's expiry gets that expiry (recorded as a revocation that
// takes effect then, `effectiveAt`).
export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    ALTER TABLE api_keys ADD COLUMN parent_key_id uuid REFERENCES api_keys(id);
    CREATE INDEX api_keys_parent ON api_keys (parent_key_id) WHERE parent_key_id IS NOT NULL;

    UPDATE api_keys c SET parent_key_id = p.id
      FROM api_keys p
     WHERE c.created_by = p.id AND p.organisation_id = c.organisation_id AND p.id <> c.id;

    -- Descendants of a key that has ended (revoked or expired), with the parent each one hangs from.
    WITH RECURSIVE ended AS (
      SELECT c.id, c.parent_key_id,
             CASE WHEN p.revoked_at IS NOT NULL THEN 'parent-revoked' ELSE 'parent-expired' END AS reason
        FROM api_keys c JOIN api_keys p ON p.id = c.parent_key_id
       WHERE p.revoked_at IS NOT NULL OR p.expires_at <= now()
      UNION
      SELECT c.id, c.parent_key_id, e.reason
        FROM api_keys c JOIN ended e ON c.parent_key_id = e.id
    ), revoked AS (
      UPDATE api_keys k SET revoked_at = now()
        FROM (SELECT DISTINCT ON (id) id, parent_key_id, reason FROM ended ORDER BY id) e
       WHERE k.id = e.id AND k.revoked_at IS NULL
      RETURNING k.id, k.organisation_id, k.name, k.prefix, e.parent_key_id, e.reason
    )
    INSERT INTO audit_events (organisation_id, action, actor_kind, actor_label, target_kind, target_id, details)
    SELECT organisation_id, 'key.revoked', 'operator', 'migration 0103 (keys made by keys end with their parent)', 'api-key', id,
           jsonb_build_object('name', name, 'prefix', 'lpk_' || prefix, 'reason', reason, 'parentKeyId', parent_key_id)
      FROM revoked;

    -- Expiry capped by every ancestor's, walking down from keys without a parent.
    WITH RECURSIVE capped AS (
      SELECT id, expires_at AS cap FROM api_keys WHERE parent_key_id IS NULL
      UNION ALL
      SELECT c.id, CASE WHEN p.cap IS NULL THEN c.expires_at WHEN c.expires_at IS NULL THEN p.cap ELSE least(c.expires_at, p.cap) END
        FROM api_keys c JOIN capped p ON c.parent_key_id = p.id
    ), changed AS (
      UPDATE api_keys k SET expires_at = capped.cap
        FROM capped
       WHERE k.id = capped.id AND k.revoked_at IS NULL AND capped.cap IS DISTINCT FROM k.expires_at
      RETURNING k.id, k.organisation_id, k.name, k.prefix, k.parent_key_id, k.expires_at
    )
    INSERT INTO audit_events (organisation_id, action, actor_kind, actor_label, target_kind, target_id, details)
    SELECT organisation_id, 'key.revoked', 'operator', 'migration 0103 (keys made by keys end with their parent)', 'api-key', id,
           jsonb_build_object('name', name, 'prefix', 'lpk_' || prefix, 'reason', 'parent-expiry', 'parentKeyId', parent_key_id,
                              'effectiveAt', to_char(expires_at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.MS"Z"'))
      FROM changed;
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query('DROP INDEX api_keys_parent; ALTER TABLE api_keys DROP COLUMN parent_key_id;');
};
