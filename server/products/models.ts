import { DataTypes, Model, type Sequelize } from 'sequelize';

export class Product extends Model {
  declare id: string;
  declare organisationId: string;
  declare sku: string;
  declare name: string;
  declare description: string;
  declare nominalQuantity: number;
  declare unit: string;
  declare tareMode: string;
  declare fixedTare: number | null;
  declare tareUnit: string | null;
  declare density: number | null;
  declare rulebook: { id: string; params?: Record<string, unknown> };
  declare alertRecipients: string[];
  /** The plausible band of a pack's net quantity, as fractions of the nominal quantity; null = the default. */
  declare plausibilityMinFraction: number | null;
  declare plausibilityMaxFraction: number | null;
  declare createdAt: Date;
  declare updatedAt: Date;
  declare archivedAt: Date | null;
}

export function initProduct(sequelize: Sequelize): void {
  Product.init(
    {
      id: { type: DataTypes.UUID, primaryKey: true, defaultValue: DataTypes.UUIDV4 },
      organisationId: { type: DataTypes.UUID, allowNull: false },
      sku: { type: DataTypes.TEXT, allowNull: false },
      name: { type: DataTypes.TEXT, allowNull: false },
      description: { type: DataTypes.TEXT, allowNull: false, defaultValue: '' },
      nominalQuantity: { type: DataTypes.DOUBLE, allowNull: false },
      unit: { type: DataTypes.TEXT, allowNull: false },
      tareMode: { type: DataTypes.TEXT, allowNull: false },
      fixedTare: { type: DataTypes.DOUBLE },
      tareUnit: { type: DataTypes.TEXT },
      density: { type: DataTypes.DOUBLE },
      rulebook: { type: DataTypes.JSONB, allowNull: false },
      alertRecipients: { type: DataTypes.ARRAY(DataTypes.TEXT), allowNull: false, defaultValue: [] },
      plausibilityMinFraction: { type: DataTypes.DOUBLE, field: 'plausibility_min_fraction' },
      plausibilityMaxFraction: { type: DataTypes.DOUBLE, field: 'plausibility_max_fraction' },
      createdAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      updatedAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      archivedAt: { type: DataTypes.DATE },
    },
    { sequelize, tableName: 'products' },
  );
}
