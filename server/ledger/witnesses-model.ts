// A witness of an organisation's ledger: someone outside the packer's systems who receives every new
// checkpoint (server/ledger/witnesses.ts). Rows are never deleted: removal sets removedAt, so the
// e-mails already written to a witness still name them.
import { DataTypes, Model, type Sequelize } from 'sequelize';

export class LedgerWitness extends Model {
  declare id: string;
  declare organisationId: string;
  declare name: string;
  declare role: string;
  declare email: string | null;
  declare webhookId: string | null;
  declare createdAt: Date;
  declare updatedAt: Date;
  declare removedAt: Date | null;
}

export function initLedgerWitness(sequelize: Sequelize): void {
  LedgerWitness.init(
    {
      id: { type: DataTypes.UUID, primaryKey: true, defaultValue: DataTypes.UUIDV4 },
      organisationId: { type: DataTypes.UUID, allowNull: false },
      name: { type: DataTypes.TEXT, allowNull: false },
      role: { type: DataTypes.TEXT, allowNull: false },
      email: { type: DataTypes.TEXT },
      webhookId: { type: DataTypes.UUID },
      createdAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      updatedAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      removedAt: { type: DataTypes.DATE },
    },
    { sequelize, tableName: 'ledger_witnesses' },
  );
}
