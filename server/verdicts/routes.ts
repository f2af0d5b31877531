// Lots, verdicts, seals, the ledger, exports, rulebooks and the JWKS. Thin: read the validated
// request, call one function of the area, send the reply.
import { listRulebooks } from '../../shared/engine';
import { createHash } from 'node:crypto';
import type { AppContext, Handlers } from '../http/context';
import { idempotencyClaim, pageOf, sendJsonText } from '../http/replies';
import { failureProblem } from '../http/problem';
import { Failure } from '../core/errors';
import { exportOptionsOf, exportVerdicts } from './exports';
import { submitLotRequest } from './lot-request.http';
import { exportDocument, lookupSeal, verifyDocument } from './seals';
import { jwks } from './signing-keys';
import { getVerdict, isVerdictSort, listVerdicts, recomputeVerdict, type VerdictFilter } from './stored-verdicts';
import { WITHDRAW_OPERATION, withdrawVerdict } from './withdrawals';

function filterOf(q: Record<string, unknown>): VerdictFilter {
  const s = (k: string) => (typeof q[k] === 'string' ? (q[k] as string) : undefined);
  const f: VerdictFilter = {
    productId: s('productId'), line: s('line'), decision: s('decision'), lotCode: s('lotCode'), from: s('from'), to: s('to'),
    sealedFrom: s('sealedFrom'), sealedTo: s('sealedTo'), packedFrom: s('packedFrom'), packedTo: s('packedTo'), status: s('status'),
  };
  // Only the filters given (an export's header names exactly those).
  return Object.fromEntries(Object.entries(f).filter(([, v]) => v !== undefined)) as VerdictFilter;
}

export function verdictHandlers(ctx: AppContext): Handlers {
  const { config } = ctx;
  const sequelize = ctx.db.sequelize;

  return {
    getJwks: async (_req, res) => {
      res.setHeader('Cache-Control', 'public, max-age=300');
      res.json(await jwks(sequelize));
    },
    listRulebooks: (_req, res) => {
      res.json({ items: listRulebooks() });
    },

    submitLot: async (req, res) => {
      const outcome = await submitLotRequest(sequelize, config, req);
      if (outcome.kind === 'created') res.setHeader('Location', `/v1/verdicts/${outcome.view.id}`);
      sendJsonText(res, outcome.status, outcome.body, outcome.kind === 'replayed');
    },

    listVerdicts: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      // The validator has already refused a sort outside the enum (400 naming /query/sort).
      const sort = isVerdictSort(q.sort) ? q.sort : undefined;
      res.json(await listVerdicts(sequelize, req.principal!, { ...filterOf(q), ...pageOf(q), sort, counts: q.counts === true || q.counts === 'true' }));
    },
    withdrawVerdict: async (req, res) => {
      const verdictId = String(req.params.verdictId);
      const claim = idempotencyClaim(req, WITHDRAW_OPERATION);
      // The key is bound to the body and the verdict it withdraws (the path is not in the body).
      const bound = claim && { ...claim, requestHash: createHash('sha256').update(`${claim.requestHash}\n${verdictId}`).digest('hex') };
      const body = req.body as { reason: string };
      let outcome;
      try {
        outcome = await withdrawVerdict(sequelize, config, req.principal!, { verdictId, reason: body.reason }, bound, req.ip ?? null);
      } catch (err) {
        // the verdict travels in the path, the reason in the body
        if (err instanceof Failure) throw failureProblem(err, (x) => ({ pointer: x.field === '/verdictId' ? '/path/verdictId' : `/body${x.field}`, detail: x.detail }));
        throw err;
      }
      if (outcome.status === 201) res.setHeader('Location', `/v1/verdicts/${verdictId}`);
      sendJsonText(res, outcome.status, outcome.body, outcome.replayed);
    },
    getVerdict: async (req, res) => {
      res.json(await getVerdict(sequelize, req.principal!, String(req.params.verdictId)));
    },
    exportVerdict: async (req, res) => {
      const id = String(req.params.verdictId);
      const text = await exportDocument(sequelize, req.principal!, id);
      res.setHeader('Content-Disposition', `attachment; filename="verdict-${id}.json"`);
      sendJsonText(res, 200, text);
    },
    recomputeVerdict: async (req, res) => {
      res.json(await recomputeVerdict(sequelize, req.principal!, String(req.params.verdictId)));
    },
    getSeal: async (req, res) => {
      try {
        sendJsonText(res, 200, await lookupSeal(sequelize, req.principal!, String(req.params.seal)));
      } catch (err) {
        // The seal travels in the path: a short seal several verdicts share is named there.
        if (err instanceof Failure) throw failureProblem(err, (issue) => ({ pointer: `/path${issue.field}`, detail: issue.detail }));
        throw err;
      }
    },
    verifySeal: async (req, res) => {
      res.json(await verifyDocument(sequelize, req.principal!, req.body));
    },
    exportVerdicts: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      const format = q.format === 'csv' ? 'csv' : 'ndjson';
      const options = exportOptionsOf(format, q.fromSize === undefined ? undefined : Number(q.fromSize));
      const chunks = exportVerdicts(sequelize, config, req.principal!, format, filterOf(q), options);
      // Read the first chunk before committing to 200, so a database error is still a problem reply.
      const first = await chunks.next();
      const stamp = new Date().toISOString().slice(0, 10);
      res.status(200);
      res.type(format === 'csv' ? 'text/csv; charset=utf-8' : 'application/x-ndjson');
      res.setHeader('Content-Disposition', `attachment; filename="lotproof-verdicts-${stamp}.${format}"`);
      if (!first.done) res.write(first.value);
      for await (const chunk of chunks) {
        if (!res.write(chunk)) await new Promise((r) => res.once('drain', r));
      }
      res.end();
    },
  };
}
