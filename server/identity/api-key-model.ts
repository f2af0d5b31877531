import { DataTypes, Model, type Sequelize } from 'sequelize';

export class ApiKey extends Model {
  declare id: string;
  declare organisationId: string;
  declare name: string;
  declare prefix: string;
  declare secretHash: Buffer;
  declare scopes: string[];
  declare expiresAt: Date | null;
  declare revokedAt: Date | null;
  declare lastUsedAt: Date | null;
  declare createdBy: string | null;
  /** The key that made this one (null when an admin or the operator did): it ends when its parent ends. */
  declare parentKeyId: string | null;
  declare createdAt: Date;
}

export function initApiKey(sequelize: Sequelize): void {
  ApiKey.init(
    {
      id: { type: DataTypes.UUID, primaryKey: true, defaultValue: DataTypes.UUIDV4 },
      organisationId: { type: DataTypes.UUID, allowNull: false },
      name: { type: DataTypes.TEXT, allowNull: false },
      prefix: { type: DataTypes.TEXT, allowNull: false },
      secretHash: { type: DataTypes.BLOB, allowNull: false },
      scopes: { type: DataTypes.ARRAY(DataTypes.TEXT), allowNull: false },
      expiresAt: { type: DataTypes.DATE },
      revokedAt: { type: DataTypes.DATE },
      lastUsedAt: { type: DataTypes.DATE },
      createdBy: { type: DataTypes.UUID },
      parentKeyId: { type: DataTypes.UUID },
      createdAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
    },
    { sequelize, tableName: 'api_keys' },
  );
}
