// What a verdict's certificate shows, read from what is stored: the verdict (its view and sealed
// record), the net quantities the engine judged (recomputed from the sealed input, as the console's
// verdict page does), and the checkpoint of the organisation's ledger the seal is proven in. Reads
// only: a certificate never issues a checkpoint; a verdict newer than the latest checkpoint says so.
import type { Sequelize } from 'sequelize';
import { NotFound } from '../core/errors';
import type { Principal } from '../core/principal';
import { latestCheckpoint, type Checkpoint } from '../ledger/checkpoints';
import { verifyInclusion, leafHash } from '../ledger/merkle';
import { inclusionProofs } from '../ledger/proofs';
import { findVerdictRow } from '../verdicts/stored-verdicts';
import { verdictView, type VerdictView } from '../verdicts/verdict-records';
import { toNet } from '../../shared/engine/net';
import type { LotInput } from '../../shared/engine/types';

/** Where the seal stands in the ledger's signed checkpoints. */
export type Proven =
  | { kind: 'proven'; checkpoint: Checkpoint; proofHashes: number }
  | { kind: 'not-yet'; latestTreeSize: number | null };

/** A withdrawal mark, when the verdict view carries one (its shape is the withdrawal's own). */
export interface WithdrawalMark {
  reason: string | null;
  at: string | null;
  by: string | null;
}

export interface CertificateData {
  verdict: VerdictView;
  /** Net quantities of the packs judged (both samples after a second sample), in the product's unit. */
  net: number[];
  proven: Proven;
  withdrawal: WithdrawalMark | null;
  /** Link a QR code points at: `<publicUrl>/verify/<seal>`. */
  verifyUrl: string;
}

/** The withdrawal mark of a verdict view, if any: read loosely, as the withdrawal's fields are its own. */
function withdrawalOf(view: VerdictView): WithdrawalMark | null {
  const v = view as unknown as Record<string, unknown>;
  const w = (v.withdrawal ?? v.withdrawnBy ?? null) as Record<string, unknown> | null;
  if (!w || typeof w !== 'object') return v.withdrawn === true ? { reason: null, at: null, by: null } : null;
  const text = (x: unknown) => (typeof x === 'string' ? x : null);
  const by = w.by ?? w.withdrawnBy ?? w.submittedBy;
  const byText = typeof by === 'string' ? by : by && typeof by === 'object' ? text((by as Record<string, unknown>).email) ?? text((by as Record<string, unknown>).name) : null;
  return { reason: text(w.reason), at: text(w.recordedAt) ?? text(w.at), by: byText };
}

/** The checkpoint that covers the seal (the latest, when it does), with its inclusion proof checked here. */
async function provenIn(sequelize: Sequelize, organisationId: string, sequence: number, seal: string): Promise<Proven> {
  const latest = await latestCheckpoint(sequelize, organisationId);
  if (!latest || latest.treeSize < sequence) return { kind: 'not-yet', latestTreeSize: latest?.treeSize ?? null };
  const [proof] = await inclusionProofs(sequelize, organisationId, [sequence - 1], latest.treeSize);
  const ok = verifyInclusion(
    sequence - 1,
    latest.treeSize,
    leafHash(Buffer.from(seal, 'hex')),
    proof!.hashes.map((h) => Buffer.from(h, 'hex')),
    Buffer.from(latest.rootHash, 'hex'),
  );
  // A proof that does not verify is a broken ledger, not a certificate to print as proven.
  if (!ok) throw new Error(`inclusion proof of seal ${seal} does not verify against checkpoint ${latest.treeSize}`);
  return { kind: 'proven', checkpoint: latest, proofHashes: proof!.hashes.length };
}

export async function certificateData(sequelize: Sequelize, principal: Principal, id: string, publicUrl: string): Promise<CertificateData> {
  const row = await findVerdictRow(sequelize, principal.organisationId, { id }, true);
  if (!row) throw new NotFound(`no verdict ${id} in your organisation`);
  const verdict = verdictView(row);
  const record = JSON.parse(row.record!) as { input?: LotInput };
  const converted = record.input ? toNet(record.input) : null;
  const net = converted?.ok ? Array.from(converted.data.net) : [];
  const proven = await provenIn(sequelize, principal.organisationId, verdict.seal.sequence, verdict.seal.value);
  return { verdict, net, proven, withdrawal: withdrawalOf(verdict), verifyUrl: `${publicUrl}/verify/${verdict.seal.value}` };
}
