import type { Migration } from '../db/migrate';

// Console sessions also end after a time without use (LOTPROOF_SESSION_IDLE_MINUTES), besides
// their absolute lifetime: last_seen_at is when the session last made a request (to the minute).
export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query('ALTER TABLE sessions ADD COLUMN last_seen_at timestamptz NOT NULL DEFAULT now()');
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query('ALTER TABLE sessions DROP COLUMN last_seen_at');
};
