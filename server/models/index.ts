// Registers every Sequelize model on one instance. Each area of the product owns its model files
// and adds one line here.
import type { Sequelize } from 'sequelize';
import { initApiKey } from './api-key';
import { initOrganisation } from './organisation';
import { initIdentityModels } from './identity';
import { initVerdictModels } from './verdicts';

export function initModels(sequelize: Sequelize): void {
  initOrganisation(sequelize);
  initApiKey(sequelize);
  initIdentityModels(sequelize);
  initVerdictModels(sequelize);
}

export { ApiKey } from './api-key';
export { Organisation } from './organisation';
export { AuditEvent, Invitation, PasswordReset, Session, UsageDay, User } from './identity';
export { Product, WebhookEndpoint } from './verdicts';
