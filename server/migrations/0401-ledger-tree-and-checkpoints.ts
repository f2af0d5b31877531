import type { Migration } from '../db/migrate';

// The ledger's Merkle tree (RFC 9162 §2.1) per organisation, its signed checkpoints, and the
// background walks of a whole chain.
//
// ledger_tree_nodes holds every perfect subtree hash: level 0 are the leaf hashes, level k index i
// covers leaves [i·2^k, (i+1)·2^k). A proof or a root needs O(log n) of them; the built size of a
// tree is its highest leaf index + 1 (read from the primary key backwards), so no row ever changes.
// No foreign key on organisation_id: the builder inserts thousands of rows a batch, and the tree of
// an organisation is only ever built from that organisation's verdicts.
//
// Both tables are append-only like verdicts (the trigger function of 0201); checkpoints of one
// organisation have increasing tree sizes (a trigger refuses an older or equal size).
export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    CREATE TABLE ledger_tree_nodes (
      organisation_id uuid NOT NULL,
      level smallint NOT NULL CHECK (level BETWEEN 0 AND 62),
      idx bigint NOT NULL CHECK (idx >= 0),
      hash bytea NOT NULL CHECK (octet_length(hash) = 32),
      PRIMARY KEY (organisation_id, level, idx)
    );
    CREATE TRIGGER ledger_tree_nodes_append_only BEFORE UPDATE OR DELETE ON ledger_tree_nodes
      FOR EACH ROW EXECUTE FUNCTION lotproof_append_only();
    CREATE TRIGGER ledger_tree_nodes_no_truncate BEFORE TRUNCATE ON ledger_tree_nodes
      FOR EACH STATEMENT EXECUTE FUNCTION lotproof_append_only();

    CREATE TABLE ledger_checkpoints (
      organisation_id uuid NOT NULL REFERENCES organisations(id),
      tree_size bigint NOT NULL CHECK (tree_size >= 1),
      root_hash text NOT NULL CHECK (root_hash ~ '^[0-9a-f]{64}$'),
      issued_at timestamptz NOT NULL,
      kid text NOT NULL,
      signature text NOT NULL,
      PRIMARY KEY (organisation_id, tree_size)
    );
    CREATE TRIGGER ledger_checkpoints_append_only BEFORE UPDATE OR DELETE ON ledger_checkpoints
      FOR EACH ROW EXECUTE FUNCTION lotproof_append_only();
    CREATE TRIGGER ledger_checkpoints_no_truncate BEFORE TRUNCATE ON ledger_checkpoints
      FOR EACH STATEMENT EXECUTE FUNCTION lotproof_append_only();

    CREATE FUNCTION lotproof_checkpoint_grows() RETURNS trigger LANGUAGE plpgsql AS $fn$
    BEGIN
      IF EXISTS (SELECT 1 FROM ledger_checkpoints WHERE organisation_id = NEW.organisation_id AND tree_size >= NEW.tree_size) THEN
        RAISE EXCEPTION 'a checkpoint of organisation % at tree size % or larger exists already', NEW.organisation_id, NEW.tree_size
          USING ERRCODE = 'unique_violation';
      END IF;
      RETURN NEW;
    END
    $fn$;
    CREATE TRIGGER ledger_checkpoints_grow BEFORE INSERT ON ledger_checkpoints
      FOR EACH ROW EXECUTE FUNCTION lotproof_checkpoint_grows();

    -- A background walk of a whole chain: progress is written as it goes; a walk whose process died
    -- stops beating (heartbeat_at) and is shown as interrupted.
    CREATE TABLE ledger_walks (
      id uuid PRIMARY KEY,
      organisation_id uuid NOT NULL REFERENCES organisations(id),
      status text NOT NULL CHECK (status IN ('running', 'finished', 'interrupted')),
      tree_size bigint NOT NULL,
      checked bigint NOT NULL DEFAULT 0,
      total bigint NOT NULL,
      intact boolean,
      first_break jsonb,
      findings jsonb NOT NULL DEFAULT '[]',
      started_at timestamptz NOT NULL DEFAULT now(),
      heartbeat_at timestamptz NOT NULL DEFAULT now(),
      finished_at timestamptz
    );
    CREATE INDEX ledger_walks_organisation ON ledger_walks (organisation_id, started_at DESC);
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    DROP TABLE ledger_walks, ledger_checkpoints, ledger_tree_nodes;
    DROP FUNCTION lotproof_checkpoint_grows();
  `);
};
