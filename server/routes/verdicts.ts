// Products, lots, verdicts, seals, the ledger, exports, webhooks, rulebooks and the JWKS. Thin:
// read the validated request, call one service, send the reply.
import { listRulebooks } from '../../shared/engine';
import type { AppContext, Handlers } from '../http/context';
import { exportVerdicts } from '../services/exports';
import { idempotent } from '../services/idempotency';
import { idemKey, sendJsonText, sendStored } from '../http/replies';
import { submitLot, type CsvQuery } from '../services/lots';
import { archiveProduct, createProduct, getProduct, listProducts, updateProduct } from '../services/products';
import { exportDocument, lookupSeal, verifyDocument, verifyLedger } from '../services/seals';
import { jwks } from '../services/signing-keys';
import { secretBox } from '../services/secret-box';
import { getVerdict, isVerdictSort, listVerdicts, recomputeVerdict, type VerdictFilter } from '../services/verdicts';
import {
  createWebhook,
  deleteWebhook,
  getWebhook,
  listDeliveries,
  listWebhooks,
  sendTestWebhook,
  updateWebhook,
} from '../services/webhooks';

function filterOf(q: Record<string, unknown>): VerdictFilter {
  const s = (k: string) => (typeof q[k] === 'string' ? (q[k] as string) : undefined);
  return { productId: s('productId'), line: s('line'), decision: s('decision'), lotCode: s('lotCode'), from: s('from'), to: s('to') };
}

function page(q: Record<string, unknown>): { limit: number; cursor?: string } {
  return { limit: Number(q.limit ?? 50), cursor: typeof q.cursor === 'string' ? q.cursor : undefined };
}

export function verdictHandlers(ctx: AppContext): Handlers {
  const { config } = ctx;
  const sequelize = ctx.db.sequelize;
  const allowPrivate = config.verdicts.webhookAllowPrivateTargets;
  const box = secretBox(config);

  return {
    getJwks: async (_req, res) => {
      res.setHeader('Cache-Control', 'public, max-age=300');
      res.json(await jwks(sequelize));
    },
    listRulebooks: (_req, res) => {
      res.json({ items: listRulebooks() });
    },

    listProducts: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      res.json(await listProducts(req.principal!, { ...page(q), sku: typeof q.sku === 'string' ? q.sku : undefined }));
    },
    createProduct: async (req, res) => {
      const p = req.principal!;
      const r = await idempotent(sequelize, p.organisationId, 'createProduct', idemKey(req), req.body, async () => {
        const v = await createProduct(p, req.body);
        return { status: 201, value: v, resourceId: v.id };
      });
      sendStored(res, r);
    },
    getProduct: async (req, res) => {
      res.json(await getProduct(req.principal!, String(req.params.productId)));
    },
    updateProduct: async (req, res) => {
      res.json(await updateProduct(req.principal!, String(req.params.productId), req.body));
    },
    archiveProduct: async (req, res) => {
      await archiveProduct(req.principal!, String(req.params.productId));
      res.status(204).end();
    },

    submitLot: async (req, res) => {
      const query = { ...(req.query as Record<string, unknown>) };
      const lotRequest = req.is('text/csv')
        ? { kind: 'csv' as const, text: typeof req.body === 'string' ? req.body : '', query: query as CsvQuery }
        : { kind: 'json' as const, body: req.body, raw: req.rawBody, query };
      const outcome = await submitLot(sequelize, config, req.principal!, lotRequest, idemKey(req));
      if (outcome.kind === 'created') res.setHeader('Location', `/v1/verdicts/${outcome.view.id}`);
      sendJsonText(res, outcome.status, outcome.body, outcome.kind === 'replayed');
    },

    listVerdicts: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      // The validator has already refused a sort outside the enum (400 naming /query/sort).
      const sort = isVerdictSort(q.sort) ? q.sort : undefined;
      res.json(await listVerdicts(sequelize, req.principal!, { ...filterOf(q), ...page(q), sort }));
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
      sendJsonText(res, 200, await lookupSeal(sequelize, req.principal!, String(req.params.seal)));
    },
    verifySeal: async (req, res) => {
      res.json(await verifyDocument(sequelize, req.principal!, req.body));
    },
    verifyLedger: async (req, res) => {
      res.json(await verifyLedger(sequelize, req.principal!));
    },
    exportVerdicts: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      const format = q.format === 'csv' ? 'csv' : 'ndjson';
      const chunks = exportVerdicts(sequelize, req.principal!, format, filterOf(q));
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

    listWebhooks: async (req, res) => {
      res.json(await listWebhooks(req.principal!));
    },
    createWebhook: async (req, res) => {
      const p = req.principal!;
      // (the reply shows the signing secret once; a replay of it is kept sealed too)
      const r = await idempotent(sequelize, p.organisationId, 'createWebhook', idemKey(req), req.body, async () => {
        const v = await createWebhook(p, req.body, allowPrivate, box);
        return { status: 201, value: v, resourceId: v.id };
      }, box);
      sendStored(res, r);
    },
    getWebhook: async (req, res) => {
      res.json(await getWebhook(req.principal!, String(req.params.webhookId)));
    },
    updateWebhook: async (req, res) => {
      res.json(await updateWebhook(req.principal!, String(req.params.webhookId), req.body, allowPrivate));
    },
    deleteWebhook: async (req, res) => {
      await deleteWebhook(req.principal!, String(req.params.webhookId));
      res.status(204).end();
    },
    sendTestWebhook: async (req, res) => {
      res.status(202).json(await sendTestWebhook(sequelize, req.principal!, String(req.params.webhookId)));
    },
    listWebhookDeliveries: async (req, res) => {
      res.json(await listDeliveries(sequelize, req.principal!, String(req.params.webhookId), page(req.query as Record<string, unknown>)));
    },
  };
}
