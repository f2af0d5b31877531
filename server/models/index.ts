// Registers every Sequelize model on one instance. Each area of the product owns its model files
// and adds one line here.
import type { Sequelize } from 'sequelize';
import { initApiKey } from './api-key';
import { initOrganisation } from './organisation';

export function initModels(sequelize: Sequelize): void {
  initOrganisation(sequelize);
  initApiKey(sequelize);
}

export { ApiKey } from './api-key';
export { Organisation } from './organisation';
