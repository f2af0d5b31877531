import type { Migration } from '../db/migrate';

export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    CREATE TABLE organisations (
      id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
      name text NOT NULL CHECK (length(name) BETWEEN 1 AND 200),
      slug text NOT NULL UNIQUE CHECK (slug ~ '^[a-z0-9][a-z0-9-]{0,62}$'),
      demo boolean NOT NULL DEFAULT false,
      created_at timestamptz NOT NULL DEFAULT now()
    );
    CREATE TABLE api_keys (
      id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
      organisation_id uuid NOT NULL REFERENCES organisations(id) ON DELETE CASCADE,
      name text NOT NULL CHECK (length(name) BETWEEN 1 AND 200),
      -- visible part of the key, for recognition in lists; the secret is stored only as a SHA-256 hash
      prefix text NOT NULL UNIQUE,
      secret_hash bytea NOT NULL,
      scopes text[] NOT NULL CHECK (cardinality(scopes) > 0),
      expires_at timestamptz,
      revoked_at timestamptz,
      last_used_at timestamptz,
      created_by uuid,
      created_at timestamptz NOT NULL DEFAULT now()
    );
    CREATE INDEX api_keys_organisation ON api_keys (organisation_id, created_at DESC);
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query('DROP TABLE api_keys; DROP TABLE organisations;');
};
