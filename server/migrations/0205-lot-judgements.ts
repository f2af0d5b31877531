import type { Migration } from '../db/migrate';

// One lot, one judgement (issue 16). A lot is (organisation, product, lot code); its verdicts form
// a line: its first judgement, then each later verdict names the one before it — a second sample
// its first sample (first_sample_verdict_id, 0201), a re-test the verdict it re-tests
// (retest_of_verdict_id, with the reason). Two unique indexes hold the line: one first judgement a
// lot, one successor a verdict. The ledger checks the same under its lock (ledger.ts) and answers a
// 409; the indexes make a fork impossible even for a writer that skipped the check.
//
// Also: who submitted each verdict (a user or an API key, as the record names them; never a
// secret), and a product's plausibility band (fractions of its nominal quantity; NULL = the default
// band, shared/plausibility.ts).
//
// Adding columns fires no row trigger, so the append-only verdicts keep every sealed row as it was.
// Lots judged more than once before this migration stay as they are: their later first judgements
// are left out of the lot index by id (they are listed in the index's predicate), so the index can be
// built; the ledger still refuses a new judgement of such a lot, as of any other.
export const up: Migration = async ({ context: qi }) => {
  const [dups] = await qi.sequelize.query(`
    SELECT id FROM (
      SELECT id, row_number() OVER (PARTITION BY organisation_id, product_id, lot_code ORDER BY sequence) AS n
      FROM verdicts WHERE first_sample_verdict_id IS NULL
    ) x WHERE n > 1 ORDER BY id`);
  const legacy = (dups as { id: string }[]).map((r) => r.id);
  for (const id of legacy) if (!/^[0-9a-f-]{36}$/.test(id)) throw new Error(`unexpected verdict id ${id}`);
  const exceptLegacy = legacy.length > 0 ? ` AND id NOT IN (${legacy.map((id) => `'${id}'::uuid`).join(', ')})` : '';
  await qi.sequelize.query(`
    ALTER TABLE verdicts
      ADD COLUMN retest_of_verdict_id uuid REFERENCES verdicts(id),
      ADD COLUMN retest_reason text CHECK (length(retest_reason) BETWEEN 1 AND 500),
      ADD COLUMN submitted_by json,
      ADD CONSTRAINT verdicts_retest_has_reason CHECK ((retest_of_verdict_id IS NULL) = (retest_reason IS NULL)),
      ADD CONSTRAINT verdicts_second_sample_or_retest CHECK (first_sample_verdict_id IS NULL OR retest_of_verdict_id IS NULL);
    CREATE UNIQUE INDEX verdicts_one_judgement_per_lot ON verdicts (organisation_id, product_id, lot_code)
      WHERE first_sample_verdict_id IS NULL AND retest_of_verdict_id IS NULL${exceptLegacy};
    CREATE UNIQUE INDEX verdicts_one_successor ON verdicts ((coalesce(first_sample_verdict_id, retest_of_verdict_id)))
      WHERE first_sample_verdict_id IS NOT NULL OR retest_of_verdict_id IS NOT NULL;
    -- finds the verdict that re-tests a verdict (its view's retestedBy)
    CREATE UNIQUE INDEX verdicts_one_retest ON verdicts (retest_of_verdict_id) WHERE retest_of_verdict_id IS NOT NULL;
    CREATE INDEX verdicts_lot ON verdicts (organisation_id, product_id, lot_code, sequence DESC);

    ALTER TABLE products
      ADD COLUMN plausibility_min_fraction double precision CHECK (plausibility_min_fraction >= 0),
      ADD COLUMN plausibility_max_fraction double precision,
      ADD CONSTRAINT products_plausibility_band CHECK (
        (plausibility_min_fraction IS NULL) = (plausibility_max_fraction IS NULL)
        AND (plausibility_max_fraction IS NULL OR plausibility_max_fraction > plausibility_min_fraction));
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    ALTER TABLE products DROP CONSTRAINT products_plausibility_band, DROP COLUMN plausibility_max_fraction, DROP COLUMN plausibility_min_fraction;
    DROP INDEX verdicts_lot;
    DROP INDEX verdicts_one_retest;
    DROP INDEX verdicts_one_successor;
    DROP INDEX verdicts_one_judgement_per_lot;
    ALTER TABLE verdicts DROP CONSTRAINT verdicts_second_sample_or_retest, DROP CONSTRAINT verdicts_retest_has_reason,
      DROP COLUMN submitted_by, DROP COLUMN retest_reason, DROP COLUMN retest_of_verdict_id;
  `);
};
