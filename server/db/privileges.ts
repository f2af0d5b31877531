// Least privilege in PostgreSQL (issue 15): migrations run as the role that owns the tables; the
// server runs as an app role that owns nothing, so it can never ALTER a table, switch a trigger off,
// TRUNCATE or DROP. On the ledger's append-only tables it may only read and insert; on every other
// table of ours it reads and writes rows. The owner re-applies these grants after every migration
// run (server/db/prepare.ts), so a table a new migration adds is covered at once.
import type { Sequelize } from 'sequelize';

/**
 * Tables whose rows, once written, never change: the app's role gets SELECT and INSERT only.
 * Whoever adds an append-only table adds its name here (tests/integration/ledger-privileges.test.ts
 * fails for a table with the lotproof_append_only() trigger that is missing). A name whose table does
 * not exist (yet) is skipped.
 */
export const APPEND_ONLY_TABLES: readonly string[] = ['verdicts', 'signing_keys', 'ledger_tree_nodes', 'ledger_checkpoints', 'verdict_withdrawals'];

/** Tables the app only reads (the migrations' own record), and the chain's view over verdicts and withdrawals (0206). */
const READ_ONLY_TABLES: readonly string[] = ['schema_migrations', 'ledger_entries'];

/** The job queue's schema (pg-boss), installed by the owner during migration. */
export const JOB_SCHEMA = 'pgboss';

/** pg-boss functions that create or drop a queue's partition: they run with the owner's rights. */
const JOB_SCHEMA_DDL_FUNCTIONS = ['create_queue(text, json)', 'delete_queue(text)'];

const ident = (name: string) => `"${name.replace(/"/g, '""')}"`;
const list = (names: readonly string[]) => names.map((n) => `'${n.replace(/'/g, "''")}'`).join(', ');

/**
 * The statements the owner runs to give `appRole` exactly what the server needs (idempotent: every
 * right on our tables is revoked first, then granted again).
 */
export function appPrivilegeStatements(appRole: string, ownerRole: string): string {
  const app = ident(appRole);
  return `
    GRANT USAGE ON SCHEMA public TO ${app};
    REVOKE ALL ON ALL TABLES IN SCHEMA public FROM ${app};
    DO $grants$
    DECLARE t text;
    BEGIN
      FOR t IN SELECT c.relname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
               WHERE n.nspname = 'public' AND c.relkind IN ('r', 'p', 'v') LOOP
        IF t IN (${list(APPEND_ONLY_TABLES)}) THEN
          EXECUTE format('GRANT SELECT, INSERT ON public.%I TO ${app.replace(/'/g, "''")}', t);
        ELSIF t IN (${list(READ_ONLY_TABLES)}) THEN
          EXECUTE format('GRANT SELECT ON public.%I TO ${app.replace(/'/g, "''")}', t);
        ELSE
          EXECUTE format('GRANT SELECT, INSERT, UPDATE, DELETE ON public.%I TO ${app.replace(/'/g, "''")}', t);
        END IF;
      END LOOP;
    END
    $grants$;
    GRANT USAGE, SELECT, UPDATE ON ALL SEQUENCES IN SCHEMA public TO ${app};

    GRANT USAGE ON SCHEMA ${JOB_SCHEMA} TO ${app};
    GRANT SELECT, INSERT, UPDATE, DELETE ON ALL TABLES IN SCHEMA ${JOB_SCHEMA} TO ${app};
    GRANT USAGE, SELECT, UPDATE ON ALL SEQUENCES IN SCHEMA ${JOB_SCHEMA} TO ${app};
    -- A queue's partition is made by create_queue (running as the owner, below): the app reaches it too.
    ALTER DEFAULT PRIVILEGES FOR ROLE ${ident(ownerRole)} IN SCHEMA ${JOB_SCHEMA} GRANT SELECT, INSERT, UPDATE, DELETE ON TABLES TO ${app};
    ${JOB_SCHEMA_DDL_FUNCTIONS.map((f) => `ALTER FUNCTION ${JOB_SCHEMA}.${f} SECURITY DEFINER SET search_path = pg_catalog, ${JOB_SCHEMA};`).join('\n    ')}
  `;
}

/** Grants the app's role its rights on every table there is now; run as the owner after migrating. */
export async function grantAppPrivileges(sequelize: Sequelize, appRole: string): Promise<void> {
  const [rows] = await sequelize.query('SELECT current_user AS owner');
  const owner = (rows as Array<{ owner: string }>)[0]!.owner;
  await sequelize.query(appPrivilegeStatements(appRole, owner));
}
