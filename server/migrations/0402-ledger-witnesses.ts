import type { Migration } from '../db/migrate';

// Witnesses: people outside the packer (an auditor, a customer, an inspector) who receive every new
// checkpoint, by e-mail and/or through a webhook endpoint subscribed to `ledger.checkpoint`, so that
// copies of past checkpoints live outside the packer's systems (issue 15).
//
// A removed witness keeps its row (removed_at), so the e-mails already written to it still name
// someone. The outbox tables were made for verdicts: a checkpoint's webhook delivery and e-mail have
// no verdict, so they name the checkpoint by its tree size instead. A NULL verdict_id never collides
// in UNIQUE (endpoint_id, verdict_id, event_type) (NULLs are distinct), so checkpoint deliveries get
// a unique index of their own: one delivery per endpoint and checkpoint, one e-mail per witness and
// checkpoint.
export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    CREATE TABLE ledger_witnesses (
      id uuid PRIMARY KEY,
      organisation_id uuid NOT NULL REFERENCES organisations(id),
      name text NOT NULL CHECK (length(name) BETWEEN 1 AND 200),
      role text NOT NULL CHECK (length(role) BETWEEN 1 AND 100),
      email text CHECK (length(email) BETWEEN 3 AND 320),
      webhook_id uuid REFERENCES webhook_endpoints(id),
      created_at timestamptz NOT NULL DEFAULT now(),
      updated_at timestamptz NOT NULL DEFAULT now(),
      removed_at timestamptz,
      CHECK (email IS NOT NULL OR webhook_id IS NOT NULL)
    );
    CREATE INDEX ledger_witnesses_organisation ON ledger_witnesses (organisation_id, created_at) WHERE removed_at IS NULL;

    ALTER TABLE webhook_deliveries ADD COLUMN checkpoint_tree_size bigint;
    CREATE UNIQUE INDEX webhook_deliveries_checkpoint ON webhook_deliveries (endpoint_id, checkpoint_tree_size, event_type)
      WHERE checkpoint_tree_size IS NOT NULL;

    ALTER TABLE alert_emails
      ALTER COLUMN verdict_id DROP NOT NULL,
      ADD COLUMN checkpoint_tree_size bigint,
      ADD COLUMN witness_id uuid REFERENCES ledger_witnesses(id),
      ADD CONSTRAINT alert_emails_about CHECK (verdict_id IS NOT NULL OR (checkpoint_tree_size IS NOT NULL AND witness_id IS NOT NULL));
    CREATE UNIQUE INDEX alert_emails_checkpoint_witness ON alert_emails (witness_id, checkpoint_tree_size)
      WHERE checkpoint_tree_size IS NOT NULL;
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    DROP INDEX alert_emails_checkpoint_witness;
    DELETE FROM alert_emails WHERE verdict_id IS NULL;
    ALTER TABLE alert_emails DROP CONSTRAINT alert_emails_about, DROP COLUMN witness_id, DROP COLUMN checkpoint_tree_size,
      ALTER COLUMN verdict_id SET NOT NULL;
    DROP INDEX webhook_deliveries_checkpoint;
    ALTER TABLE webhook_deliveries DROP COLUMN checkpoint_tree_size;
    DROP TABLE ledger_witnesses;
  `);
};
