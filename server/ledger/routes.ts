// Checkpoints, proofs, the range check and walks of the ledger. Thin: read the validated request,
// call one function of the area, send the reply.
import type { AppContext, Handlers } from '../http/context';
import { failureProblem } from '../http/problem';
import { pageOf } from '../http/replies';
import { checkpointAt, listCheckpoints, requireLatestCheckpoint } from './checkpoints';
import { issueOnDemand } from './issue';
import { verifyLedgerRange } from './ledger-check';
import { proveConsistency, proveInclusion } from './proofs';
import { getWalk, startWalk } from './walks';
import { Failure, NotFound } from '../core/errors';
import { idempotent } from '../core/idempotency';
import { idempotencyClaim, sendStored } from '../http/replies';
import { addWitness, listWitnesses, removeWitness } from './witnesses';
import { installWitnessHook } from './witnesses-outbox';
import { auditActor, recordAudit, recordAuditOn } from '../identity/audit-trail';

const num = (v: unknown): number | undefined => (v === undefined ? undefined : Number(v));
const str = (v: unknown): string | undefined => (typeof v === 'string' ? v : undefined);

export function ledgerHandlers(ctx: AppContext): Handlers {
  const { config, logger } = ctx;
  const sequelize = ctx.db.sequelize;
  // Every checkpoint issued in this process (on demand, before a check, a walk or a proof) tells its witnesses.
  installWitnessHook();

  return {
    listCheckpoints: async (req, res) => {
      res.json(await listCheckpoints(sequelize, req.principal!.organisationId, pageOf(req.query as Record<string, unknown>)));
    },
    issueCheckpoint: async (req, res) => {
      const organisationId = req.principal!.organisationId;
      const actor = await auditActor({ principal: req.principal!, ip: req.ip ?? null });
      // A checkpoint issued on request is in the audit trail, written in the checkpoint's own transaction.
      const issued = await issueOnDemand(sequelize, config, organisationId, {
        inTransaction: (conn, c) => recordAuditOn(conn, organisationId, actor, 'checkpoint.issued', null, { treeSize: c.treeSize, rootHash: c.rootHash, kid: c.kid }),
      });
      if (!issued) throw new NotFound('your ledger is empty: a checkpoint covers at least one verdict');
      if (issued.created) res.setHeader('Location', `/v1/ledger/checkpoints/${issued.checkpoint.treeSize}`);
      res.status(issued.created ? 201 : 200).json(issued.checkpoint);
    },
    getLatestCheckpoint: async (req, res) => {
      res.json(await requireLatestCheckpoint(sequelize, req.principal!.organisationId));
    },
    getCheckpoint: async (req, res) => {
      // The problem handler no longer sees this route's path parameters, so the field is located here.
      try {
        res.json(await checkpointAt(sequelize, req.principal!.organisationId, Number(req.params.treeSize), '/treeSize'));
      } catch (err) {
        if (err instanceof Failure) throw failureProblem(err, (issue) => ({ pointer: `/path${issue.field}`, detail: issue.detail }));
        throw err;
      }
    },
    getInclusionProof: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      res.json(await proveInclusion(sequelize, config, req.principal!.organisationId, { seal: str(q.seal), verdictId: str(q.verdictId), treeSize: num(q.treeSize) }));
    },
    getConsistencyProof: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      res.json(await proveConsistency(sequelize, req.principal!.organisationId, { fromSize: Number(q.fromSize), toSize: num(q.toSize) }));
    },
    verifyLedger: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      res.json(await verifyLedgerRange(sequelize, config, req.principal!.organisationId, { from: num(q.from), to: num(q.to) }));
    },
    startLedgerWalk: async (req, res) => {
      const walk = await startWalk(sequelize, config, logger, req.principal!.organisationId);
      await recordAudit(req.principal!.organisationId, { principal: req.principal!, ip: req.ip ?? null }, 'ledger.walk-started', { kind: 'ledger-walk', id: walk.id }, { treeSize: walk.treeSize });
      res.setHeader('Location', `/v1/ledger/walks/${walk.id}`);
      res.status(202).json(walk);
    },
    getLedgerWalk: async (req, res) => {
      res.json(await getWalk(sequelize, req.principal!.organisationId, String(req.params.walkId)));
    },
    listWitnesses: async (req, res) => {
      res.json(await listWitnesses(req.principal!));
    },
    addWitness: async (req, res) => {
      const r = await idempotent(sequelize, idempotencyClaim(req, 'addWitness'), async () => {
        const v = await addWitness(req.principal!, req.body, { ip: req.ip ?? null });
        return { status: 201, value: v, resourceId: v.id };
      });
      sendStored(res, r);
    },
    removeWitness: async (req, res) => {
      await removeWitness(req.principal!, String(req.params.witnessId), { ip: req.ip ?? null });
      res.status(204).end();
    },
  };
}
