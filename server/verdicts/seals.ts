// Seals and the chain: look a verdict up by its seal with its neighbours, check a sealed document
// someone holds, and walk an organisation's whole chain to find the first break.
import { createHash } from 'node:crypto';
import { setImmediate as nextTurn } from 'node:timers/promises';
import { QueryTypes, type Sequelize } from 'sequelize';
import type { components } from '../../shared/api/schema';
import { NotFound } from '../core/errors';
import { CanonicalisationError, canonicalJson } from './canonical';
import type { Principal } from '../core/principal';
import { publicKeyFor, verifySealSignature } from './signing-keys';
import { findVerdictRow } from './stored-verdicts';
import { DOCUMENT_FORMAT, sealedDocumentText, verdictView, type SealedDocument, type VerdictRecord } from './verdict-records';

type Neighbour = components['schemas']['ChainNeighbour'];

async function neighbour(sequelize: Sequelize, organisationId: string, sequence: number): Promise<Neighbour> {
  const rows = await sequelize.query<{ id: string; sequence: string; seal: string }>(
    'SELECT id, sequence, seal FROM verdicts WHERE organisation_id = $1 AND sequence = $2',
    { bind: [organisationId, sequence], type: QueryTypes.SELECT },
  );
  const r = rows[0];
  return r ? { verdictId: r.id, sequence: Number(r.sequence), seal: r.seal } : null;
}

/** The sealed document text of a verdict (canonical JSON), for export. */
export async function exportDocument(sequelize: Sequelize, principal: Principal, id: string): Promise<string> {
  const row = await findVerdictRow(sequelize, principal.organisationId, { id }, true);
  if (!row) throw new NotFound(`no verdict ${id} in your organisation`);
  return sealedDocumentText({ seal: row.seal, signature: row.signature, kid: row.kid, record: row.record! });
}

/** The lookup reply as JSON text (the record is spliced in as stored, not re-serialised). */
export async function lookupSeal(sequelize: Sequelize, principal: Principal, seal: string): Promise<string> {
  const row = await findVerdictRow(sequelize, principal.organisationId, { seal }, true);
  if (!row) throw new NotFound(`no verdict with seal ${seal} in your organisation`);
  const seq = Number(row.sequence);
  const [previous, next] = await Promise.all([
    seq > 1 ? neighbour(sequelize, principal.organisationId, seq - 1) : Promise.resolve(null),
    neighbour(sequelize, principal.organisationId, seq + 1),
  ]);
  const doc = sealedDocumentText({ seal: row.seal, signature: row.signature, kid: row.kid, record: row.record! });
  return `{"verdict":${JSON.stringify(verdictView(row))},"document":${doc},"previous":${JSON.stringify(previous)},"next":${JSON.stringify(next)}}`;
}

export async function verifyDocument(sequelize: Sequelize, principal: Principal, doc: SealedDocument): Promise<components['schemas']['SealCheck']> {
  const findings: string[] = [];
  let computed: string | null = null;
  try {
    computed = createHash('sha256').update(canonicalJson(doc.record), 'utf8').digest('hex');
  } catch (err) {
    if (!(err instanceof CanonicalisationError)) throw err;
    findings.push(`the record cannot be canonicalised: ${err.message}`);
  }
  const seal = doc.seal.toLowerCase();
  const hashMatches = computed === seal;
  if (computed !== null && !hashMatches) findings.push('the SHA-256 of the canonical record is not the seal: the record or the seal was changed');
  const key = await publicKeyFor(sequelize, doc.kid);
  let signatureValid = false;
  if (!key) findings.push(`no published key has kid ${JSON.stringify(doc.kid)}`);
  else {
    signatureValid = verifySealSignature(key, seal, doc.signature);
    if (!signatureValid) findings.push('the signature does not verify for this seal and key');
  }
  const rows = await sequelize.query<{ id: string; sequence: string; record: string }>(
    'SELECT id, sequence FROM verdicts WHERE organisation_id = $1 AND seal = $2',
    { bind: [principal.organisationId, seal], type: QueryTypes.SELECT },
  );
  const found = rows[0];
  if (!found) findings.push("the seal is not in your organisation's ledger");
  const record = doc.record as Partial<VerdictRecord>;
  if (found && hashMatches && record.sequence !== Number(found.sequence)) findings.push('the record names another chain position than the ledger');
  const valid = hashMatches && signatureValid && !!found && findings.length === 0;
  if (valid) findings.push(`the record hashes to its seal, the signature is valid, and it is verdict ${found!.id} at position ${found!.sequence} of your ledger`);
  return {
    valid,
    hashMatches,
    signatureValid,
    inLedger: !!found,
    verdictId: found?.id ?? null,
    sequence: found ? Number(found.sequence) : null,
    computedSeal: computed,
    findings,
  };
}

/** Signature checks done without a break before other requests get a turn (each takes 0.1–0.5 ms). */
const SLICE_MS = 10;

/**
 * Walks the chain from the first verdict: each record must hash to its seal, be signed by a
 * published key, name its own position and the previous seal, and belong to the organisation.
 * The walk gives other requests a turn at least every 10 ms of checking, so a long chain never
 * holds up /healthz or lots.
 */
export async function verifyLedger(sequelize: Sequelize, principal: Principal): Promise<components['schemas']['LedgerCheck']> {
  const org = principal.organisationId;
  const keys = new Map<string, Awaited<ReturnType<typeof publicKeyFor>>>();
  let expectedSeq = 1;
  let previous: string | null = null;
  let checked = 0;
  let head: { sequence: number; seal: string } | null = null;
  const PAGE = 200;
  for (;;) {
    // Hash and read the records in the database, so a page of large lots never crosses the wire.
    const rows = await sequelize.query<{
      id: string; sequence: string; seal: string; previous_seal: string | null; signature: string; kid: string;
      digest: string; rec_sequence: string | null; rec_previous: string | null; rec_org: string | null;
    }>(
      `SELECT v.id, v.sequence, v.seal, v.previous_seal, v.signature, v.kid,
              encode(sha256(convert_to(v.record, 'UTF8')), 'hex') AS digest,
              j.doc->>'sequence' AS rec_sequence, j.doc->>'previousSeal' AS rec_previous, j.doc->'organisation'->>'id' AS rec_org
       FROM verdicts v CROSS JOIN LATERAL (SELECT v.record::json AS doc) j
       WHERE v.organisation_id = $1 AND v.sequence >= $2 ORDER BY v.sequence LIMIT $3`,
      { bind: [org, expectedSeq, PAGE], type: QueryTypes.SELECT },
    );
    let slice = performance.now();
    for (const r of rows) {
      if (performance.now() - slice >= SLICE_MS) {
        await nextTurn();
        slice = performance.now();
      }
      const seq = Number(r.sequence);
      const brk = (reason: string) => ({ intact: false, verdictsChecked: checked, head, firstBreak: { sequence: seq, verdictId: r.id, reason } });
      if (seq !== expectedSeq) return brk(`position ${expectedSeq} is missing`);
      if (r.digest !== r.seal) return brk('the stored record does not hash to its seal');
      if (Number(r.rec_sequence) !== seq) return brk('the record names another position');
      if ((r.rec_previous ?? null) !== previous || (r.previous_seal ?? null) !== previous) return brk('the record does not link to the seal before it');
      if (r.rec_org !== org) return brk('the record belongs to another organisation');
      if (!keys.has(r.kid)) keys.set(r.kid, await publicKeyFor(sequelize, r.kid));
      const key = keys.get(r.kid);
      if (!key) return brk(`the signing key ${r.kid} is not published`);
      if (!verifySealSignature(key, r.seal, r.signature)) return brk('the signature does not verify');
      previous = r.seal;
      head = { sequence: seq, seal: r.seal };
      expectedSeq++;
      checked++;
    }
    if (rows.length < PAGE) break;
  }
  return { intact: true, verdictsChecked: checked, head, firstBreak: null };
}

export { DOCUMENT_FORMAT };
