import type { Migration } from '../db/migrate';

// Verdict records compressed with lz4 (PostgreSQL 14+, built with lz4 as Debian's packages are)
// instead of stored uncompressed (0201). 0201 chose no compression because PostgreSQL's default,
// pglz, took about 350 ms for a 7 MB record of a million measurements; lz4 takes a few
// milliseconds and about halves what is written. Measured on this 2-core machine, insert + commit of
// such a record in isolation: uncompressed 46–63 ms + 20 ms, lz4 45–56 ms + 3–5 ms; in the 1 000 000
// lot of bench:api the commit went from 7–23 ms to 4–6 ms. Only rows written from now on are
// compressed; reading is transparent. A server built without lz4 keeps the uncompressed storage.
export const up: Migration = async ({ context: qi }) => {
  await qi.sequelize.query(`
    DO $$
    BEGIN
      ALTER TABLE verdicts ALTER COLUMN record SET STORAGE EXTENDED, ALTER COLUMN record SET COMPRESSION lz4;
    EXCEPTION WHEN feature_not_supported THEN
      RAISE NOTICE 'lz4 is not available in this PostgreSQL; verdict records stay uncompressed';
    END $$;
  `);
};

export const down: Migration = async ({ context: qi }) => {
  await qi.sequelize.query('ALTER TABLE verdicts ALTER COLUMN record SET STORAGE EXTERNAL, ALTER COLUMN record SET COMPRESSION DEFAULT');
};
