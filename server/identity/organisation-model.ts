import { DataTypes, Model, type Sequelize } from 'sequelize';

export class Organisation extends Model {
  declare id: string;
  declare name: string;
  declare slug: string;
  declare demo: boolean;
  declare createdAt: Date;
}

export function initOrganisation(sequelize: Sequelize): void {
  Organisation.init(
    {
      id: { type: DataTypes.UUID, primaryKey: true, defaultValue: DataTypes.UUIDV4 },
      name: { type: DataTypes.TEXT, allowNull: false },
      slug: { type: DataTypes.TEXT, allowNull: false },
      demo: { type: DataTypes.BOOLEAN, allowNull: false, defaultValue: false },
      createdAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
    },
    { sequelize, tableName: 'organisations' },
  );
}
