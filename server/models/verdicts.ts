// The verdict area's models. Verdict rows and the ledger are written with plain SQL by the ledger
// service (one multi-row insert per group commit); these models serve the CRUD of products and
// webhook endpoints.
import type { Sequelize } from 'sequelize';
import { initProduct } from './product';
import { initWebhookEndpoint } from './webhook-endpoint';

export function initVerdictModels(sequelize: Sequelize): void {
  initProduct(sequelize);
  initWebhookEndpoint(sequelize);
}

export { Product } from './product';
export { WebhookEndpoint } from './webhook-endpoint';
