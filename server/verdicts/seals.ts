// Seals and the chain: look a verdict up by its seal with its neighbours, and check a sealed document
// someone holds. (The check of the chain itself lives in server/ledger/.)
import { createHash } from 'node:crypto';
import { QueryTypes, type Sequelize } from 'sequelize';
import type { components } from '../../shared/api/schema';
import { Conflict, NotFound } from '../core/errors';
import { CanonicalisationError, canonicalJson } from './canonical';
import type { Principal } from '../core/principal';
import { publicKeyValidAt, verifySealSignature } from './signing-keys';
import { findVerdictRow } from './stored-verdicts';
import { DOCUMENT_FORMAT, sealedDocumentText, verdictView, type SealedDocument, type VerdictRecord } from './verdict-records';

type Neighbour = components['schemas']['ChainNeighbour'];

async function neighbour(sequelize: Sequelize, organisationId: string, sequence: number): Promise<Neighbour> {
  // The chain holds verdicts and withdrawals (ledger_entries, issue 16): a neighbour may be either.
  const rows = await sequelize.query<{ id: string; sequence: string; seal: string; kind: 'verdict' | 'withdrawal' }>(
    'SELECT id, sequence, seal, kind FROM ledger_entries WHERE organisation_id = $1 AND sequence = $2',
    { bind: [organisationId, sequence], type: QueryTypes.SELECT },
  );
  const r = rows[0];
  return r ? { verdictId: r.id, sequence: Number(r.sequence), seal: r.seal, kind: r.kind } : null;
}

/** The sealed document text of a verdict (canonical JSON), for export. */
export async function exportDocument(sequelize: Sequelize, principal: Principal, id: string): Promise<string> {
  const row = await findVerdictRow(sequelize, principal.organisationId, { id }, true);
  if (!row) throw new NotFound(`no verdict ${id} in your organisation`);
  return sealedDocumentText({ seal: row.seal, signature: row.signature, kid: row.kid, record: row.record! });
}

/** The lookup reply as JSON text (the record is spliced in as stored, not re-serialised). */
export async function lookupSeal(sequelize: Sequelize, principal: Principal, given: string): Promise<string> {
  const seal = given.length < 64 ? await resolveSealPrefix(sequelize, principal.organisationId, given) : given;
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

/**
 * The full seal a short seal names: a prefix of 8 to 63 hex digits, as the lists show it, looked for
 * in the caller's organisation only (another organisation's seals are never counted or named).
 * A prefix two or more seals share is a 409 that says how many; none is a 404.
 */
export async function resolveSealPrefix(sequelize: Sequelize, organisationId: string, prefix: string): Promise<string> {
  const p = prefix.toLowerCase();
  // starts_with on the organisation's rows (its index on organisation_id narrows them first).
  const [found] = await sequelize.query<{ n: number; seal: string | null }>(
    'SELECT count(*)::int AS n, min(seal) AS seal FROM verdicts WHERE organisation_id = $1 AND starts_with(seal, $2)',
    { bind: [organisationId, p], type: QueryTypes.SELECT },
  );
  if (!found || found.n === 0) throw new NotFound(`no verdict whose seal starts with ${p} in your organisation`);
  if (found.n > 1) {
    throw new Conflict(`${found.n} verdicts of your organisation have seals that start with ${p}: give more of the seal`, 'ambiguous-seal-prefix',
      [{ field: '/seal', detail: `${found.n} seals start with these ${p.length} digits; give more digits (up to all 64)` }], { candidates: found.n });
  }
  return found.seal!;
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
  // The key must have been valid when the record says it was sealed (its recordedAt in [nbf, exp)).
  const recordedAt = (doc.record as Partial<VerdictRecord> | null)?.recordedAt;
  const at = typeof recordedAt === 'string' ? new Date(recordedAt) : null;
  let signatureValid = false;
  if (!at || Number.isNaN(at.getTime())) findings.push('the record has no recordedAt to check the key\'s validity window against');
  else {
    const found = await publicKeyValidAt(sequelize, doc.kid, at);
    if ('reason' in found) findings.push(found.message);
    else {
      signatureValid = verifySealSignature(found.key, seal, doc.signature);
      if (!signatureValid) findings.push('the signature does not verify for this seal and key');
    }
  }
  const rows = await sequelize.query<{ id: string; sequence: string; kind: string }>(
    'SELECT id, sequence, kind FROM ledger_entries WHERE organisation_id = $1 AND seal = $2',
    { bind: [principal.organisationId, seal], type: QueryTypes.SELECT },
  );
  const found = rows[0];
  if (!found) findings.push("the seal is not in your organisation's ledger");
  const record = doc.record as Partial<VerdictRecord>;
  if (found && hashMatches && record.sequence !== Number(found.sequence)) findings.push('the record names another chain position than the ledger');
  const valid = hashMatches && signatureValid && !!found && findings.length === 0;
  if (valid) findings.push(`the record hashes to its seal, the signature is valid, and it is ${found!.kind} ${found!.id} at position ${found!.sequence} of your ledger`);
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

export { DOCUMENT_FORMAT };
