// Product handlers. Thin: read the validated request, call one function of the area, send the reply.
import type { AppContext, Handlers } from '../http/context';
import { idempotencyClaim, pageOf, sendStored } from '../http/replies';
import { idempotent } from '../core/idempotency';
import { archiveProduct, createProduct, getProduct, listProducts, updateProduct } from './products';

export function productHandlers(ctx: AppContext): Handlers {
  const sequelize = ctx.db.sequelize;
  return {
    listProducts: async (req, res) => {
      const q = req.query as Record<string, unknown>;
      res.json(await listProducts(req.principal!, { ...pageOf(q), sku: typeof q.sku === 'string' ? q.sku : undefined }));
    },
    createProduct: async (req, res) => {
      const p = req.principal!;
      const r = await idempotent(sequelize, idempotencyClaim(req, 'createProduct'), async () => {
        const v = await createProduct(p, req.body, { ip: req.ip ?? null });
        return { status: 201, value: v, resourceId: v.id };
      });
      sendStored(res, r);
    },
    getProduct: async (req, res) => {
      res.json(await getProduct(req.principal!, String(req.params.productId)));
    },
    updateProduct: async (req, res) => {
      res.json(await updateProduct(req.principal!, String(req.params.productId), req.body, { ip: req.ip ?? null }));
    },
    archiveProduct: async (req, res) => {
      await archiveProduct(req.principal!, String(req.params.productId), { ip: req.ip ?? null });
      res.status(204).end();
    },
  };
}
