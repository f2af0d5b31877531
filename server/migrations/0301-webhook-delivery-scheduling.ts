import type { Migration } from '../db/migrate';

// Webhook deliveries scheduled by the outbox itself (server/jobs/outbox.ts): when each is due
// (`due_at`: at once, or after a failed attempt's back-off), which queued job may attempt it
// (`job_token`: a job left over from before a re-queue finds another token and does nothing), and
// two partial indexes for the fair drain — what is ready per endpoint, and what is in flight per
// endpoint and organisation. An attempt is written before the POST (`in_flight`) and completed
// after it, so an attempt cut short by a crash stays in the log. Endpoints remember their last
// test event, for the limit on test events. Existing rows keep their meaning: old attempts are
// complete (the default), and deliveries waiting in the outbox are due from when they were made.
export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    ALTER TABLE webhook_deliveries
      ADD COLUMN due_at timestamptz NOT NULL DEFAULT now(),
      ADD COLUMN job_token uuid;
    UPDATE webhook_deliveries SET due_at = created_at WHERE status = 'pending' AND enqueued_at IS NULL;
    CREATE INDEX webhook_deliveries_ready ON webhook_deliveries (endpoint_id, due_at) WHERE enqueued_at IS NULL AND status = 'pending';
    CREATE INDEX webhook_deliveries_in_flight ON webhook_deliveries (endpoint_id, organisation_id) WHERE enqueued_at IS NOT NULL AND status = 'pending';

    ALTER TABLE webhook_attempts ADD COLUMN in_flight boolean NOT NULL DEFAULT false;
    CREATE INDEX webhook_attempts_in_flight ON webhook_attempts (attempted_at) WHERE in_flight;

    ALTER TABLE webhook_endpoints ADD COLUMN last_test_at timestamptz;
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    ALTER TABLE webhook_endpoints DROP COLUMN last_test_at;
    DROP INDEX webhook_attempts_in_flight;
    ALTER TABLE webhook_attempts DROP COLUMN in_flight;
    DROP INDEX webhook_deliveries_in_flight, webhook_deliveries_ready;
    ALTER TABLE webhook_deliveries DROP COLUMN job_token, DROP COLUMN due_at;
  `);
};
