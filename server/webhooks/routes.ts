// Webhook endpoint handlers. Thin: read the validated request, call one function of the area, send the reply.
import type { AppContext, Handlers } from '../http/context';
import { idempotencyClaim, pageOf, sendStored } from '../http/replies';
import { idempotent } from '../core/idempotency';
import { secretBox } from '../core/secret-box';
import { createWebhook, deleteWebhook, getWebhook, listDeliveries, listWebhooks, sendTestWebhook, updateWebhook } from './endpoints';

export function webhookHandlers(ctx: AppContext): Handlers {
  const { config } = ctx;
  const sequelize = ctx.db.sequelize;
  const allowPrivate = config.verdicts.webhookAllowPrivateTargets;
  const box = secretBox(config);
  return {
    listWebhooks: async (req, res) => {
      res.json(await listWebhooks(req.principal!));
    },
    createWebhook: async (req, res) => {
      const p = req.principal!;
      // (the reply shows the signing secret once; a replay of it is kept sealed too)
      const r = await idempotent(sequelize, idempotencyClaim(req, 'createWebhook'), async () => {
        const v = await createWebhook(p, req.body, allowPrivate, box, { ip: req.ip ?? null });
        return { status: 201, value: v, resourceId: v.id };
      }, box);
      sendStored(res, r);
    },
    getWebhook: async (req, res) => {
      res.json(await getWebhook(req.principal!, String(req.params.webhookId)));
    },
    updateWebhook: async (req, res) => {
      res.json(await updateWebhook(req.principal!, String(req.params.webhookId), req.body, allowPrivate, { ip: req.ip ?? null }));
    },
    deleteWebhook: async (req, res) => {
      await deleteWebhook(req.principal!, String(req.params.webhookId), { ip: req.ip ?? null });
      res.status(204).end();
    },
    sendTestWebhook: async (req, res) => {
      res.status(202).json(await sendTestWebhook(sequelize, req.principal!, String(req.params.webhookId), { ip: req.ip ?? null }));
    },
    listWebhookDeliveries: async (req, res) => {
      res.json(await listDeliveries(sequelize, req.principal!, String(req.params.webhookId), pageOf(req.query as Record<string, unknown>)));
    },
  };
}
