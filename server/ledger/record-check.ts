// The check of each stored record of a chain, in order: it hashes to its seal, names its own
// position, links to the seal before it, belongs to the organisation, and is signed by a published
// key that was valid when the record says it was sealed. Shared by the range check and the walk.
import { QueryTypes, type Sequelize } from 'sequelize';
import { keyWindow, refusalAt, verifySealSignature, type KeyWindow } from '../verdicts/signing-keys';

export interface ChainRow {
  id: string;
  sequence: string;
  seal: string;
  previous_seal: string | null;
  signature: string;
  kid: string;
  digest: string;
  rec_sequence: string | null;
  rec_previous: string | null;
  rec_org: string | null;
  recorded_at: string | null;
}

export interface Break {
  sequence: number;
  verdictId: string;
  reason: string;
}

/**
 * Records (verdicts and withdrawals, ledger_entries) at positions [from, to] in order, `limit` at a time. The record is hashed and read in the
 * database, so a page of large lots never crosses the wire.
 */
export function chainPage(sequelize: Sequelize, organisationId: string, from: number, to: number, limit: number): Promise<ChainRow[]> {
  return sequelize.query<ChainRow>(
    `SELECT v.id, v.sequence, v.seal, v.previous_seal, v.signature, v.kid,
            encode(sha256(convert_to(v.record, 'UTF8')), 'hex') AS digest,
            j.doc->>'sequence' AS rec_sequence, j.doc->>'previousSeal' AS rec_previous, j.doc->'organisation'->>'id' AS rec_org,
            j.doc->>'recordedAt' AS recorded_at
     FROM ledger_entries v CROSS JOIN LATERAL (SELECT v.record::json AS doc) j
     WHERE v.organisation_id = $1 AND v.sequence >= $2 AND v.sequence <= $3 ORDER BY v.sequence LIMIT $4`,
    { bind: [organisationId, from, to, limit], type: QueryTypes.SELECT },
  );
}

/** The seal at one position, or null (the link the first record of a range must make). */
export async function sealAt(sequelize: Sequelize, organisationId: string, sequence: number): Promise<string | null> {
  const rows = await sequelize.query<{ seal: string }>('SELECT seal FROM ledger_entries WHERE organisation_id = $1 AND sequence = $2', {
    bind: [organisationId, sequence],
    type: QueryTypes.SELECT,
  });
  return rows[0]?.seal ?? null;
}

export class RecordChecker {
  private readonly keys = new Map<string, KeyWindow | null>();
  /** The position the next record must have. */
  expected: number;

  constructor(
    private readonly sequelize: Sequelize,
    private readonly organisationId: string,
    from: number,
    /** The seal of position from − 1 (null when from is 1). */
    private previous: string | null,
  ) {
    this.expected = from;
  }

  /** Checks the next record; returns the break, or null when it is intact. */
  async check(r: ChainRow): Promise<Break | null> {
    const seq = Number(r.sequence);
    const brk = (reason: string): Break => ({ sequence: seq, verdictId: r.id, reason });
    if (seq !== this.expected) return brk(`position ${this.expected} is missing`);
    if (r.digest !== r.seal) return brk('the stored record does not hash to its seal');
    if (Number(r.rec_sequence) !== seq) return brk('the record names another position');
    if ((r.rec_previous ?? null) !== this.previous || (r.previous_seal ?? null) !== this.previous) return brk('the record does not link to the seal before it');
    if (r.rec_org !== this.organisationId) return brk('the record belongs to another organisation');
    if (!this.keys.has(r.kid)) this.keys.set(r.kid, await keyWindow(this.sequelize, r.kid));
    const window = this.keys.get(r.kid)!;
    if (!window) return brk(`the signing key ${r.kid} is not published`);
    const refusal = refusalAt(window, r.kid, new Date(r.recorded_at ?? ''));
    if (refusal) return brk(`the signing key was not valid when the record was sealed: ${refusal.message}`);
    if (!verifySealSignature(window.publicKey, r.seal, r.signature)) return brk('the signature does not verify');
    this.previous = r.seal;
    this.expected++;
    return null;
  }
}
