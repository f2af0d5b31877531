// Every area's route handlers, keyed by operationId, under the area that owns them. The OpenAPI
// document says which area owns each operation (x-lotproof-area); the app refuses to start when an
// operation has no handler in its area, or an area answers an operation that is not its own.
import type { AppContext, Handlers } from './http/context';
import { certificateHandlers } from './certificates/routes';
import { identityHandlers } from './identity/routes';
import { ledgerHandlers } from './ledger/routes';
import { meteringHandlers } from './metering/routes';
import { productHandlers } from './products/routes';
import { systemHandlers } from './system/routes';
import { verdictHandlers } from './verdicts/routes';
import { webhookHandlers } from './webhooks/routes';

export function handlersByArea(ctx: AppContext): Record<string, Handlers> {
  return {
    system: systemHandlers(ctx),
    identity: identityHandlers(ctx),
    metering: meteringHandlers(ctx),
    products: productHandlers(ctx),
    verdicts: verdictHandlers(ctx),
    ledger: ledgerHandlers(ctx),
    webhooks: webhookHandlers(ctx),
    certificates: certificateHandlers(ctx),
  };
}

/** The handler of each operation; throws when the handlers and the document's areas disagree. */
export function handlersFor(ctx: AppContext, operations: { operationId: string; area: string }[]): Handlers {
  const areas = handlersByArea(ctx);
  const owner = new Map(operations.map((op) => [op.operationId, op.area]));
  const problems: string[] = [];
  for (const [area, handlers] of Object.entries(areas)) {
    for (const id of Object.keys(handlers)) {
      if (owner.get(id) !== area) problems.push(`server/${area}/routes.ts answers ${id}, which the document ${owner.has(id) ? `gives to area ${owner.get(id)}` : 'does not declare'}`);
    }
  }
  const all: Handlers = {};
  for (const op of operations) {
    const h = areas[op.area]?.[op.operationId];
    if (h) all[op.operationId] = h;
    else problems.push(`no handler for ${op.operationId} in server/${op.area}/routes.ts`);
  }
  if (problems.length > 0) throw new Error(`Routes and the OpenAPI document disagree:\n  ${problems.join('\n  ')}`);
  return all;
}
