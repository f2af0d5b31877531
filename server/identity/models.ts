// Identity persistence: console users, sessions, invitations, password resets and the admin audit
// trail (Sequelize models). No rules here; they live beside it in server/identity/.
import { DataTypes, Model, type Sequelize } from 'sequelize';

export class User extends Model {
  declare id: string;
  declare organisationId: string;
  declare email: string;
  declare name: string;
  /** One or more of ROLES (server/core/principal.ts), without repeats, in that order. */
  declare roles: string[];
  declare passwordHash: string;
  declare createdAt: Date;
  declare removedAt: Date | null;
  declare removedBy: string | null;
}

export class Session extends Model {
  declare id: string;
  declare organisationId: string;
  declare userId: string;
  declare tokenHash: Buffer;
  declare createdAt: Date;
  declare expiresAt: Date;
  declare revokedAt: Date | null;
  declare ip: string | null;
  declare lastSeenAt: Date;
}

export class Invitation extends Model {
  declare id: string;
  declare organisationId: string;
  declare email: string;
  declare roles: string[];
  declare tokenHash: Buffer;
  declare invitedBy: string | null;
  declare createdAt: Date;
  declare expiresAt: Date;
  declare acceptedAt: Date | null;
  declare acceptedUserId: string | null;
  declare revokedAt: Date | null;
}

export class PasswordReset extends Model {
  declare id: string;
  declare userId: string;
  declare tokenHash: Buffer;
  declare createdAt: Date;
  declare expiresAt: Date;
  declare usedAt: Date | null;
}

export class AuditEvent extends Model {
  declare id: string;
  declare organisationId: string;
  declare at: Date;
  declare action: string;
  declare actorKind: string;
  declare actorId: string | null;
  declare actorLabel: string;
  declare targetKind: string | null;
  declare targetId: string | null;
  declare ip: string | null;
  declare details: Record<string, unknown>;
}

const uuid = (allowNull = true) => ({ type: DataTypes.UUID, allowNull });

export function initIdentityModels(sequelize: Sequelize): void {
  User.init(
    {
      id: { type: DataTypes.UUID, primaryKey: true, defaultValue: DataTypes.UUIDV4 },
      organisationId: uuid(false),
      email: { type: DataTypes.TEXT, allowNull: false },
      name: { type: DataTypes.TEXT, allowNull: false, defaultValue: '' },
      roles: { type: DataTypes.ARRAY(DataTypes.TEXT), allowNull: false },
      passwordHash: { type: DataTypes.TEXT, allowNull: false },
      createdAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      removedAt: { type: DataTypes.DATE },
      removedBy: uuid(),
    },
    { sequelize, tableName: 'users' },
  );
  Session.init(
    {
      id: { type: DataTypes.UUID, primaryKey: true, defaultValue: DataTypes.UUIDV4 },
      organisationId: uuid(false),
      userId: uuid(false),
      tokenHash: { type: DataTypes.BLOB, allowNull: false },
      createdAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      expiresAt: { type: DataTypes.DATE, allowNull: false },
      revokedAt: { type: DataTypes.DATE },
      ip: { type: DataTypes.TEXT },
      lastSeenAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
    },
    { sequelize, tableName: 'sessions' },
  );
  Invitation.init(
    {
      id: { type: DataTypes.UUID, primaryKey: true, defaultValue: DataTypes.UUIDV4 },
      organisationId: uuid(false),
      email: { type: DataTypes.TEXT, allowNull: false },
      roles: { type: DataTypes.ARRAY(DataTypes.TEXT), allowNull: false },
      tokenHash: { type: DataTypes.BLOB, allowNull: false },
      invitedBy: uuid(),
      createdAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      expiresAt: { type: DataTypes.DATE, allowNull: false },
      acceptedAt: { type: DataTypes.DATE },
      acceptedUserId: uuid(),
      revokedAt: { type: DataTypes.DATE },
    },
    { sequelize, tableName: 'invitations' },
  );
  PasswordReset.init(
    {
      id: { type: DataTypes.UUID, primaryKey: true, defaultValue: DataTypes.UUIDV4 },
      userId: uuid(false),
      tokenHash: { type: DataTypes.BLOB, allowNull: false },
      createdAt: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      expiresAt: { type: DataTypes.DATE, allowNull: false },
      usedAt: { type: DataTypes.DATE },
    },
    { sequelize, tableName: 'password_resets' },
  );
  AuditEvent.init(
    {
      id: { type: DataTypes.UUID, primaryKey: true, defaultValue: DataTypes.UUIDV4 },
      organisationId: uuid(false),
      at: { type: DataTypes.DATE, allowNull: false, defaultValue: DataTypes.NOW },
      action: { type: DataTypes.TEXT, allowNull: false },
      actorKind: { type: DataTypes.TEXT, allowNull: false },
      actorId: uuid(),
      actorLabel: { type: DataTypes.TEXT, allowNull: false, defaultValue: '' },
      targetKind: { type: DataTypes.TEXT },
      targetId: uuid(),
      ip: { type: DataTypes.TEXT },
      details: { type: DataTypes.JSONB, allowNull: false, defaultValue: {} },
    },
    { sequelize, tableName: 'audit_events' },
  );
}
