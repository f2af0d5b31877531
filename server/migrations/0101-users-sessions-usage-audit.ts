import type { Migration } from '../db/migrate';

// Identity: console users, their sessions, invitations and password resets (one-time tokens stored
// only as SHA-256 hashes), the admin audit trail, daily usage per key, and the shared rate-limit
// counters of rate-limiter-flexible.
export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    CREATE TABLE users (
      id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
      organisation_id uuid NOT NULL REFERENCES organisations(id) ON DELETE CASCADE,
      email text NOT NULL CHECK (email = lower(email) AND length(email) BETWEEN 3 AND 254),
      name text NOT NULL DEFAULT '' CHECK (length(name) <= 200),
      role text NOT NULL CHECK (role IN ('admin', 'quality', 'auditor')),
      -- scrypt, with its parameters and per-user salt: "scrypt$ln=15,r=8,p=1$<salt>$<hash>"
      password_hash text NOT NULL,
      created_at timestamptz NOT NULL DEFAULT now(),
      removed_at timestamptz,
      removed_by uuid
    );
    -- one active account per e-mail address across all organisations: sign-in needs no organisation
    CREATE UNIQUE INDEX users_active_email ON users (email) WHERE removed_at IS NULL;
    CREATE INDEX users_organisation ON users (organisation_id, created_at DESC);

    CREATE TABLE sessions (
      id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
      organisation_id uuid NOT NULL REFERENCES organisations(id) ON DELETE CASCADE,
      user_id uuid NOT NULL REFERENCES users(id) ON DELETE CASCADE,
      token_hash bytea NOT NULL UNIQUE,
      created_at timestamptz NOT NULL DEFAULT now(),
      expires_at timestamptz NOT NULL,
      revoked_at timestamptz,
      ip text
    );
    CREATE INDEX sessions_user ON sessions (user_id) WHERE revoked_at IS NULL;

    CREATE TABLE invitations (
      id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
      organisation_id uuid NOT NULL REFERENCES organisations(id) ON DELETE CASCADE,
      email text NOT NULL CHECK (email = lower(email) AND length(email) BETWEEN 3 AND 254),
      role text NOT NULL CHECK (role IN ('admin', 'quality', 'auditor')),
      token_hash bytea NOT NULL UNIQUE,
      invited_by uuid,
      created_at timestamptz NOT NULL DEFAULT now(),
      expires_at timestamptz NOT NULL,
      accepted_at timestamptz,
      accepted_user_id uuid,
      revoked_at timestamptz
    );
    CREATE INDEX invitations_organisation ON invitations (organisation_id, created_at DESC);

    CREATE TABLE password_resets (
      id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
      user_id uuid NOT NULL REFERENCES users(id) ON DELETE CASCADE,
      token_hash bytea NOT NULL UNIQUE,
      created_at timestamptz NOT NULL DEFAULT now(),
      expires_at timestamptz NOT NULL,
      used_at timestamptz
    );

    CREATE TABLE audit_events (
      id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
      organisation_id uuid NOT NULL REFERENCES organisations(id) ON DELETE CASCADE,
      at timestamptz NOT NULL DEFAULT clock_timestamp(),
      action text NOT NULL,
      actor_kind text NOT NULL CHECK (actor_kind IN ('user', 'api-key', 'operator', 'anonymous')),
      actor_id uuid,
      actor_label text NOT NULL DEFAULT '',
      target_kind text,
      target_id uuid,
      ip text,
      details jsonb NOT NULL DEFAULT '{}'::jsonb
    );
    CREATE INDEX audit_events_organisation ON audit_events (organisation_id, at DESC, id DESC);

    -- Requests, lots verified and measurements processed per credential per UTC day.
    -- key_id is the nil UUID for console sessions.
    CREATE TABLE usage_daily (
      organisation_id uuid NOT NULL REFERENCES organisations(id) ON DELETE CASCADE,
      key_id uuid NOT NULL,
      day date NOT NULL,
      requests bigint NOT NULL DEFAULT 0,
      lots bigint NOT NULL DEFAULT 0,
      measurements bigint NOT NULL DEFAULT 0,
      PRIMARY KEY (organisation_id, day, key_id)
    );

    -- rate-limiter-flexible's PostgreSQL store (its own layout); shared by every API process.
    CREATE TABLE rate_limits (
      key varchar(255) PRIMARY KEY,
      points integer NOT NULL DEFAULT 0,
      expire bigint
    );
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(
    'DROP TABLE rate_limits; DROP TABLE usage_daily; DROP TABLE audit_events; DROP TABLE password_resets; DROP TABLE invitations; DROP TABLE sessions; DROP TABLE users;',
  );
};
