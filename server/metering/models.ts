// The metering area's persistence: per credential and per UTC day, the requests made, the lots
// verified and the measurements processed (table usage_daily).
import { DataTypes, Model, type Sequelize } from 'sequelize';

export class UsageDay extends Model {
  declare organisationId: string;
  declare keyId: string;
  declare day: string;
  declare requests: string;
  declare lots: string;
  declare measurements: string;
}

export function initUsageModels(sequelize: Sequelize): void {
  UsageDay.init(
    {
      organisationId: { type: DataTypes.UUID, primaryKey: true },
      keyId: { type: DataTypes.UUID, primaryKey: true },
      day: { type: DataTypes.DATEONLY, primaryKey: true },
      requests: { type: DataTypes.BIGINT, allowNull: false, defaultValue: 0 },
      lots: { type: DataTypes.BIGINT, allowNull: false, defaultValue: 0 },
      measurements: { type: DataTypes.BIGINT, allowNull: false, defaultValue: 0 },
    },
    { sequelize, tableName: 'usage_daily' },
  );
}
