// What a new checkpoint tells its witnesses: an e-mail to each witness with an e-mail address and a
// `ledger.checkpoint` webhook delivery to each enabled endpoint subscribed to it, written as outbox
// rows in the checkpoint's own transaction (so a checkpoint that is rolled back tells no one, and a
// stored one is sure to be sent). Delivered by the jobs in server/jobs (alert-email.ts and
// webhook-delivery.ts), which send whatever the rows say.
//
// Registered once per process as a hook of every checkpoint issued (checkpoints.ts
// onCheckpointIssued): on demand, on the schedule, and before a check, a walk or a proof.
import { randomUUID } from 'node:crypto';
import type { PgClient, PgResult } from '../db/raw';
import { canonicalJson } from '../verdicts/canonical';
import { onCheckpointIssued, type Checkpoint } from './checkpoints';
import { CHECKPOINT_EVENT } from './witnesses';

/** The checkpoint as witnesses receive it: its RFC 8785 canonical JSON, signature included. */
export function checkpointText(c: Checkpoint): string {
  return canonicalJson(c);
}

export const CHECKPOINT_BEGIN = '---- Lotproof checkpoint (save the next line as a .json file) ----';
export const CHECKPOINT_END = '---- end of checkpoint ----';

export function witnessEmail(c: Checkpoint, organisationName: string, witness: { name: string; role: string }): { subject: string; text: string } {
  const text = [
    `Dear ${witness.name},`,
    '',
    `${organisationName} names you (${witness.role}) as a witness of its Lotproof ledger. Its ledger has a new signed checkpoint:`,
    `${c.treeSize.toLocaleString('en-GB')} sealed verdicts, root ${c.rootHash}, issued ${c.issuedAt} under key ${c.kid}.`,
    '',
    'Keep this checkpoint and check it with the offline verifier\'s checkpoint mode ("Check a checkpoint you received on its own" in clients/verifier/README.md): ' +
      'with the checkpoints you kept before, it shows whether the ledger still extends them, so no verdict it already held can have been changed or removed.',
    '',
    CHECKPOINT_BEGIN,
    checkpointText(c),
    CHECKPOINT_END,
  ].join('\n');
  return { subject: `Lotproof: ${organisationName} ledger checkpoint at ${c.treeSize} verdicts`, text };
}

/** The `ledger.checkpoint` event body (the shape of every event: type, timestamp, data). */
export function checkpointPayload(c: Checkpoint): string {
  return JSON.stringify({ type: CHECKPOINT_EVENT, timestamp: c.issuedAt, data: c });
}

const rowsOf = async <T>(conn: PgClient, text: string, values: unknown[]): Promise<T[]> => ((await conn.query(text, values)) as PgResult).rows as T[];

/** Writes the checkpoint's e-mails and webhook deliveries; runs inside the checkpoint's transaction. */
export async function writeWitnessOutbox(conn: PgClient, c: Checkpoint): Promise<{ emails: number; deliveries: number }> {
  const witnesses = await rowsOf<{ id: string; name: string; role: string; email: string; organisation_name: string }>(
    conn,
    `SELECT w.id, w.name, w.role, w.email, o.name AS organisation_name
       FROM ledger_witnesses w JOIN organisations o ON o.id = w.organisation_id
      WHERE w.organisation_id = $1 AND w.removed_at IS NULL AND w.email IS NOT NULL
      ORDER BY w.created_at, w.id`,
    [c.organisationId],
  );
  for (const w of witnesses) {
    const mail = witnessEmail(c, w.organisation_name, w);
    await conn.query(
      `INSERT INTO alert_emails (id, organisation_id, verdict_id, recipients, subject, body, checkpoint_tree_size, witness_id)
       VALUES ($1, $2, NULL, $3, $4, $5, $6, $7)`,
      [randomUUID(), c.organisationId, [w.email], mail.subject, mail.text, c.treeSize, w.id],
    );
  }
  // Every enabled endpoint subscribed to the event, whether or not a witness names it (as for
  // verdict events). Raw SQL on the webhooks area's table, as the ledger appender reads it.
  const endpoints = await rowsOf<{ id: string }>(
    conn,
    `SELECT id FROM webhook_endpoints
      WHERE organisation_id = $1 AND enabled AND deleted_at IS NULL AND $2 = ANY(events)
      ORDER BY created_at, id`,
    [c.organisationId, CHECKPOINT_EVENT],
  );
  const payload = checkpointPayload(c);
  for (const e of endpoints) {
    await conn.query(
      `INSERT INTO webhook_deliveries (id, organisation_id, endpoint_id, verdict_id, event_type, payload, checkpoint_tree_size)
       VALUES ($1, $2, $3, NULL, $4, $5, $6)`,
      [randomUUID(), c.organisationId, e.id, CHECKPOINT_EVENT, payload, c.treeSize],
    );
  }
  return { emails: witnesses.length, deliveries: endpoints.length };
}

let installed = false;

/** Makes every checkpoint this process issues tell its witnesses; idempotent (called by each wiring point). */
export function installWitnessHook(): void {
  if (installed) return;
  installed = true;
  onCheckpointIssued(async (conn, checkpoint) => {
    await writeWitnessOutbox(conn, checkpoint);
  });
}
