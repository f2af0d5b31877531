import { DataTypes, Model, type Sequelize } from 'sequelize';

export class WebhookEndpoint extends Model {
  declare id: string;
  declare organisationId: string;
  declare url: string;
  declare description: string;
  declare events: string[];
  declare secret: string;
  declare enabled: boolean;
  declare createdAt: Date;
  declare updatedAt: Date;
  declare deletedAt: Date | null;
}

export function initWebhookEndpoint(sequelize: Sequelize): void {
  WebhookEndpoint.init(
    {
      id: { type: DataTypes.UUID, primaryKey: true, defaultValue: DataTypes.UUIDV4 },
      organisationId: { type: DataTypes.UUID, allowNull: false },
      url: { type: DataTypes.TEXT, allowNull: false },
      description: { type: DataTypes.TEXT, allowNull: false, defaultValue: '' },
      events: { type: DataTypes.ARRAY(DataTypes.TEXT), allowNull: false },
      secret: { type: DataTypes.TEXT, allowNull: false },
      enabled: { type: DataTypes.BOOLEAN, allowNull: false, defaultValue: true },
      createdAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      updatedAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      deletedAt: { type: DataTypes.DATE },
    },
    { sequelize, tableName: 'webhook_endpoints' },
  );
}
