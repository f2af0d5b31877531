import type { Migration } from '../db/migrate';

// Withdrawals (issue 16): a sealed, signed record that withdraws a verdict, appended to the same
// chain as the verdicts — it takes the next position, links to the seal before it and is a leaf of
// the same Merkle tree (FORMAT.md). The withdrawn verdict's row never changes: "withdrawn" is read
// by a lookup of its withdrawal (verdict_withdrawals.verdict_id, one per verdict).
//
// ledger_entries is the chain as one relation: every verdict and every withdrawal with the columns
// the chain's readers need (the ledger's head under its lock, the tree builder, the range check and
// the walk, exports, neighbours). A simple UNION ALL view, so PostgreSQL plans each branch on its own
// indexes ((organisation_id, sequence) unique in both) and merges them in order.
//
// One position, one record: the ledger's chain lock orders every append (ledger.ts, withdrawals.ts)
// and the head is read from ledger_entries under it. A trigger checks a withdrawal's position against
// the verdicts as it is inserted, and that it withdraws an earlier verdict of its own organisation.
export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    CREATE TABLE verdict_withdrawals (
      id uuid PRIMARY KEY,
      organisation_id uuid NOT NULL REFERENCES organisations(id),
      sequence bigint NOT NULL CHECK (sequence >= 2),
      seal text NOT NULL UNIQUE CHECK (seal ~ '^[0-9a-f]{64}$'),
      previous_seal text NOT NULL CHECK (previous_seal ~ '^[0-9a-f]{64}$'),
      signature text NOT NULL,
      kid text NOT NULL,
      record text NOT NULL,
      verdict_id uuid NOT NULL UNIQUE REFERENCES verdicts(id),
      reason text NOT NULL CHECK (length(reason) BETWEEN 1 AND 500),
      withdrawn_by json NOT NULL,
      recorded_at timestamptz NOT NULL,
      UNIQUE (organisation_id, sequence)
    );
    CREATE TRIGGER verdict_withdrawals_append_only BEFORE UPDATE OR DELETE ON verdict_withdrawals
      FOR EACH ROW EXECUTE FUNCTION lotproof_append_only();
    CREATE TRIGGER verdict_withdrawals_no_truncate BEFORE TRUNCATE ON verdict_withdrawals
      FOR EACH STATEMENT EXECUTE FUNCTION lotproof_append_only();

    CREATE FUNCTION lotproof_withdrawal_fits() RETURNS trigger LANGUAGE plpgsql AS $fn$
    BEGIN
      IF EXISTS (SELECT 1 FROM verdicts WHERE organisation_id = NEW.organisation_id AND sequence = NEW.sequence) THEN
        RAISE EXCEPTION 'position % of organisation % holds a verdict', NEW.sequence, NEW.organisation_id USING ERRCODE = 'unique_violation';
      END IF;
      IF NOT EXISTS (SELECT 1 FROM verdicts WHERE id = NEW.verdict_id AND organisation_id = NEW.organisation_id AND sequence < NEW.sequence) THEN
        RAISE EXCEPTION 'a withdrawal names an earlier verdict of its own organisation' USING ERRCODE = 'foreign_key_violation';
      END IF;
      RETURN NEW;
    END
    $fn$;
    CREATE TRIGGER verdict_withdrawals_fit BEFORE INSERT ON verdict_withdrawals
      FOR EACH ROW EXECUTE FUNCTION lotproof_withdrawal_fits();

    CREATE VIEW ledger_entries AS
      SELECT 'verdict'::text AS kind, id, organisation_id, sequence, seal, previous_seal, signature, kid, record, recorded_at FROM verdicts
      UNION ALL
      SELECT 'withdrawal'::text AS kind, id, organisation_id, sequence, seal, previous_seal, signature, kid, record, recorded_at FROM verdict_withdrawals;
  `);
  // Records compressed like the verdicts' (0203), where the server has lz4.
  await qi.sequelize.query(`
    DO $$
    BEGIN
      ALTER TABLE verdict_withdrawals ALTER COLUMN record SET COMPRESSION lz4;
    EXCEPTION WHEN feature_not_supported THEN
      RAISE NOTICE 'lz4 is not available in this PostgreSQL; withdrawal records stay as the default stores them';
    END $$;
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    DROP VIEW ledger_entries;
    DROP TABLE verdict_withdrawals;
    DROP FUNCTION lotproof_withdrawal_fits();
  `);
};
