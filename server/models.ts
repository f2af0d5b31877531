// Registers every area's Sequelize models on one instance (db/database.ts calls initModels when it
// opens a pool). Areas import their own model files, never this file; the CLI, the demo and tests
// may take the models from here.
import type { Sequelize } from 'sequelize';
import { initApiKey } from './identity/api-key-model';
import { initOrganisation } from './identity/organisation-model';
import { initIdentityModels } from './identity/models';
import { initUsageModels } from './metering/models';
import { initProduct } from './products/models';
import { initWebhookEndpoint } from './webhooks/models';
import { initLedgerWitness } from './ledger/witnesses-model';

export function initModels(sequelize: Sequelize): void {
  initOrganisation(sequelize);
  initApiKey(sequelize);
  initIdentityModels(sequelize);
  initUsageModels(sequelize);
  initProduct(sequelize);
  initWebhookEndpoint(sequelize);
  initLedgerWitness(sequelize);
}

export { ApiKey } from './identity/api-key-model';
export { Organisation } from './identity/organisation-model';
export { AuditEvent, Invitation, PasswordReset, Session, User } from './identity/models';
export { UsageDay } from './metering/models';
export { Product } from './products/models';
export { WebhookEndpoint } from './webhooks/models';
export { LedgerWitness } from './ledger/witnesses-model';
