// `npm run cli -- <command>`: the operator's tool for a fresh install and for scripts — create an
// organisation and its first admin, issue keys (the secret is printed once), list and revoke keys,
// rotate the seal signing key and the secrets key.
// Uses DATABASE_URL, or the embedded cluster under the data folder like `npm start` does.
import { randomBytes } from 'node:crypto';
import { mkdirSync } from 'node:fs';
import { connect } from 'node:net';
import { join } from 'node:path';
import { parseArgs } from 'node:util';
import { ConfigError, loadConfig } from '../config';
import { openDatabase, type Database } from '../db/database';
import { prepareDatabase } from '../db/prepare';
import { Failure } from '../core/errors';
import { ApiKey } from '../models';
import { ensureDebianPackages, MissingPackagesError } from '../platform/debian-packages';
import { startCluster, type RunningCluster } from '../platform/embedded-postgres';
import { recordAudit } from '../identity/audit-trail';
import { issueInvitation } from '../identity/invitations';
import { apiKeyView, createKey, listKeys, revokeKey } from '../identity/api-keys';
import { createOrganisation, findOrganisation } from '../identity/organisations';
import { SCOPES, type Principal, type Scope } from '../core/principal';
import { createUser } from '../identity/users';
import {
  currentSigningKey, keyWindow, recordPublicKey, retireSigningKey, revokeSigningKey, rotateSigningKeyFile, ROTATION_GRACE_MS, type SigningKey,
} from '../verdicts/signing-keys';
import { rotateSecretsKeyFile, secretBox } from '../core/secret-box';
import { resealWebhookSecrets } from '../webhooks/endpoints';

const USAGE = `Lotproof operator CLI

  npm run cli -- org:create --name "Packer Ltd" --slug packer-ltd --admin-email a@packer.example [--invite]
      Creates an organisation and its first admin. Prints a one-time password (the admin should
      change it through "forgot password"), or with --invite an invitation link instead.
  npm run cli -- org:list
  npm run cli -- key:create --org <slug|id> --name "Line 3 gateway" --scopes lots:submit,verdicts:read [--expires 2030-01-01T00:00:00Z]
      Issues an API key and prints its secret once.
  npm run cli -- key:list --org <slug|id>
  npm run cli -- key:revoke --org <slug|id> --key <key id | lpk_ prefix>
  npm run cli -- signing-key:rotate
      Replaces the seal signing key in the data folder with a new one and deletes the old private
      key (and any signing-key.*.retired.pem an earlier version kept). The old public key stays in
      /.well-known/jwks.json with exp = now + ${ROTATION_GRACE_MS / 1000} s (running servers switch to the new key within
      seconds; the grace covers them), so old seals stay verifiable; the new key's nbf is now.
      With LOTPROOF_SIGNING_KEY set, put the new PKCS#8 PEM there instead (openssl genpkey
      -algorithm ed25519), restart, then run signing-key:retire <old kid>.
  npm run cli -- signing-key:retire <kid>
      Ends a key's validity window ${ROTATION_GRACE_MS / 1000} s from now (exp); servers stop sealing with it.
  npm run cli -- signing-key:revoke <kid> --from 2026-01-31T12:00:00Z --reason "key file leaked"
      Marks a compromised key revoked from that time (to the second, rounded down): seals and
      checkpoints it signed dated at or after it no longer verify, anywhere. The key's exp moves back
      to that time. A revoked key that is this data folder's current key is rotated first.
  npm run cli -- secrets-key:rotate
      Replaces the key that seals webhook secrets in the data folder (the old one is kept as
      secrets-key.previous and still opens) and seals every stored secret again under the new key.
      Restart running servers. With LOTPROOF_SECRETS_KEY set, set the new key there and the old
      one in LOTPROOF_SECRETS_KEY_PREVIOUS, and restart: the start seals everything again.

Scopes: ${SCOPES.join(', ')}
Database: DATABASE_URL, or else the embedded cluster in LOTPROOF_DATA_DIR (default .data).`;

class UsageError extends Error {}

function need(values: Record<string, unknown>, name: string): string {
  const v = values[name];
  if (typeof v !== 'string' || v.trim() === '') throw new UsageError(`--${name} is required`);
  return v.trim();
}

/** The operator acts inside an organisation; the audit trail names the CLI. */
function operator(organisationId: string): Principal {
  // The operator at the machine may grant any scope (keys issued by keys are limited to their own scopes).
  return { organisationId, kind: 'api-key', scopes: [...SCOPES] };
}

async function portOpen(port: number): Promise<boolean> {
  return new Promise((resolve) => {
    const s = connect({ host: '127.0.0.1', port }, () => {
      s.destroy();
      resolve(true);
    });
    s.on('error', () => resolve(false));
  });
}

/**
 * Runs `fn` on the database as the tables' owner (LOTPROOF_MIGRATION_DATABASE_URL, or the embedded
 * cluster's owner role; DATABASE_URL when there is no owner's connection): the operator's changes,
 * such as a key's validity window, are more than the app's role may make.
 */
async function withDatabase<T>(fn: (db: Database, publicUrl: string, invitationTtlHours: number) => Promise<T>): Promise<T> {
  const config = loadConfig();
  let cluster: RunningCluster | null = null;
  let url = config.databaseUrl;
  let ownerUrl = config.migrationDatabaseUrl;
  let ownCluster = false;
  if (!url) {
    ensureDebianPackages(['postgresql']);
    mkdirSync(config.dataDir, { recursive: true });
    ownCluster = !(await portOpen(config.embeddedPgPort));
    cluster = startCluster({ dir: join(config.dataDir, 'postgres'), port: config.embeddedPgPort, database: 'lotproof' });
    url = cluster.appUrl;
    ownerUrl = cluster.ownerUrl;
  }
  await prepareDatabase({ databaseUrl: url, migrationDatabaseUrl: ownerUrl });
  const db = openDatabase(ownerUrl ?? url, undefined, 2);
  try {
    return await fn(db, config.publicUrl, config.sessions.invitationTtlHours);
  } finally {
    await db.close();
    if (ownCluster) cluster?.stop();
  }
}

/**
 * Rotates the data folder's key: the new key is published (nbf = now) before it replaces the old
 * file, then the old key's window ends at now + ROTATION_GRACE_MS. Deleted files are named.
 */
async function rotateFileKey(db: Database, dataDir: string): Promise<{ previous: SigningKey; next: SigningKey; nbf: Date; exp: Date }> {
  const now = new Date();
  const { previous, next, replace } = rotateSigningKeyFile(dataDir);
  await recordPublicKey(db.sequelize, previous, now); // published (again) before it is retired
  await recordPublicKey(db.sequelize, next, now);
  for (const f of replace()) console.log(`deleted ${join(dataDir, f)} (a retired private key an earlier version kept)`);
  const exp = (await retireSigningKey(db.sequelize, previous.kid, new Date(now.getTime() + ROTATION_GRACE_MS)))!;
  const nbf = (await keyWindow(db.sequelize, next.kid))!.nbf;
  return { previous, next, nbf, exp };
}

async function org(idOrSlug: string) {
  const found = await findOrganisation(idOrSlug);
  if (!found) throw new UsageError(`No organisation ${idOrSlug}`);
  return found;
}

function parseScopes(raw: string): Scope[] {
  const scopes = raw.split(',').map((s) => s.trim()).filter(Boolean);
  const bad = scopes.filter((s) => !(SCOPES as readonly string[]).includes(s));
  if (bad.length || scopes.length === 0) throw new UsageError(`--scopes must be a comma-separated list of: ${SCOPES.join(', ')}${bad.length ? ` (not: ${bad.join(', ')})` : ''}`);
  return scopes as Scope[];
}

async function main(argv: string[]): Promise<void> {
  const [command, ...rest] = argv;
  const { values, positionals } = parseArgs({
    args: rest,
    options: {
      name: { type: 'string' },
      slug: { type: 'string' },
      'admin-email': { type: 'string' },
      invite: { type: 'boolean', default: false },
      org: { type: 'string' },
      scopes: { type: 'string' },
      expires: { type: 'string' },
      key: { type: 'string' },
      from: { type: 'string' },
      reason: { type: 'string' },
    },
    strict: true,
    allowPositionals: true,
  });
  const actor = (organisationId: string) => ({ principal: operator(organisationId), kind: 'operator' as const, label: 'operator CLI' });

  switch (command) {
    case 'org:create': {
      const name = need(values, 'name');
      const slug = need(values, 'slug');
      const email = need(values, 'admin-email');
      await withDatabase(async (_db, publicUrl, ttlHours) => {
        const o = await createOrganisation({ name, slug });
        console.log(`organisation ${o.name} (${o.slug}) id ${o.id}`);
        if (values.invite) {
          const { link } = await issueInvitation({ organisationId: o.id, kind: 'operator', label: 'operator CLI' }, { email, role: 'admin' }, { publicUrl, ttlHours });
          console.log(`first admin ${email}: open this invitation link once to choose a password (expires in ${ttlHours} h):\n  ${link}`);
        } else {
          const password = randomBytes(18).toString('base64url');
          const user = await createUser({ organisationId: o.id, email, role: 'admin', password, name: 'First admin' });
          await recordAudit(o.id, { kind: 'operator', label: 'operator CLI' }, 'user.invited', { kind: 'user', id: user.id }, { email: user.email, role: 'admin', via: 'cli' });
          console.log(`first admin ${user.email}, one-time password (shown once; change it with "forgot password"):\n  ${password}`);
        }
      });
      return;
    }
    case 'org:list': {
      await withDatabase(async (db) => {
        const [rows] = await db.sequelize.query('SELECT id, slug, name, demo FROM organisations ORDER BY created_at');
        for (const r of rows as Array<{ id: string; slug: string; name: string; demo: boolean }>) console.log(`${r.id}  ${r.slug.padEnd(24)} ${r.name}${r.demo ? '  [demo]' : ''}`);
      });
      return;
    }
    case 'key:create': {
      const name = need(values, 'name');
      const scopes = parseScopes(need(values, 'scopes'));
      const expiresAt = values.expires ? String(values.expires) : null;
      if (expiresAt && Number.isNaN(Date.parse(expiresAt))) throw new UsageError('--expires must be an ISO 8601 date-time');
      await withDatabase(async () => {
        const o = await org(need(values, 'org'));
        const { key, secret } = await createKey(actor(o.id), { name, scopes, expiresAt: expiresAt ? new Date(expiresAt).toISOString() : null });
        console.log(`key ${key.id} ${key.prefix} scopes ${key.scopes.join(',')}${key.expiresAt ? ` expires ${key.expiresAt}` : ''}`);
        console.log(`secret (shown once; store it now):\n  ${secret}`);
      });
      return;
    }
    case 'key:list': {
      await withDatabase(async () => {
        const o = await org(need(values, 'org'));
        for (const k of await listKeys(o.id)) {
          console.log(`${k.id}  ${k.prefix}  ${k.status.padEnd(7)} ${k.scopes.join(',').padEnd(40)} last used ${k.lastUsedAt ?? 'never'}  ${k.name}`);
        }
      });
      return;
    }
    case 'key:revoke': {
      const ref = need(values, 'key');
      await withDatabase(async () => {
        const o = await org(need(values, 'org'));
        const found = /^lpk_/.test(ref)
          ? await ApiKey.findOne({ where: { organisationId: o.id, prefix: ref.replace(/^lpk_/, '').split('_')[0] } })
          : /^[0-9a-f-]{36}$/.test(ref)
            ? await ApiKey.findOne({ where: { organisationId: o.id, id: ref } })
            : null;
        if (!found) throw new UsageError(`No key ${ref} in ${o.slug}`);
        const k = await revokeKey(actor(o.id), found.id);
        console.log(`revoked ${k.id} ${apiKeyView(found).prefix} (${k.name})`);
      });
      return;
    }
    case 'signing-key:rotate': {
      const config = loadConfig();
      if (config.verdicts.signingKeyPem) {
        throw new UsageError('The signing key comes from LOTPROOF_SIGNING_KEY: put the new PKCS#8 PEM there (openssl genpkey -algorithm ed25519), restart the servers, then run signing-key:retire <old kid>; the old public key stays published.');
      }
      await withDatabase(async (db) => {
        const r = await rotateFileKey(db, config.dataDir);
        console.log(`retired ${r.previous.kid}: its private key is deleted; it signs nothing dated at or after ${r.exp.toISOString()} (rotation time + ${ROTATION_GRACE_MS / 1000} s grace)`);
        console.log(`signing key is now ${r.next.kid} (valid from ${r.nbf.toISOString()}); running servers switch to it within seconds`);
      });
      return;
    }
    case 'signing-key:retire': {
      const kid = positionals[0];
      if (!kid) throw new UsageError('signing-key:retire needs the key id (kid) to retire');
      await withDatabase(async (db) => {
        if (!(await keyWindow(db.sequelize, kid))) throw new UsageError(`No published signing key ${kid}`);
        const exp = await retireSigningKey(db.sequelize, kid, new Date(Date.now() + ROTATION_GRACE_MS));
        console.log(`retired ${kid}: it signs nothing dated at or after ${exp!.toISOString()}`);
      });
      return;
    }
    case 'signing-key:revoke': {
      const config = loadConfig();
      const kid = positionals[0];
      if (!kid) throw new UsageError('signing-key:revoke needs the key id (kid) to revoke');
      const fromText = need(values, 'from');
      const from = new Date(fromText);
      if (!/^\d{4}-\d{2}-\d{2}T/.test(fromText) || Number.isNaN(from.getTime())) throw new UsageError('--from must be an ISO 8601 date-time, e.g. 2026-01-31T12:00:00Z');
      const reason = need(values, 'reason');
      if (reason.length > 500) throw new UsageError('--reason must be at most 500 characters');
      await withDatabase(async (db) => {
        if (!(await keyWindow(db.sequelize, kid))) throw new UsageError(`No published signing key ${kid}`);
        // A compromised key must stop sealing here too: when it is this data folder's key, rotate first.
        if (!config.verdicts.signingKeyPem && currentSigningKey(config).kid === kid) {
          const r = await rotateFileKey(db, config.dataDir);
          console.log(`rotated first: ${kid}'s private key is deleted; signing key is now ${r.next.kid}`);
        }
        const w = (await revokeSigningKey(db.sequelize, kid, from, reason))!;
        console.log(`revoked ${kid} from ${w.revokedFrom!.toISOString()} (${w.revocationReason}); its window is now ${w.nbf.toISOString()} to ${w.exp!.toISOString()}`);
        if (config.verdicts.signingKeyPem && currentSigningKey(config).kid === kid) {
          console.log('this is the key in LOTPROOF_SIGNING_KEY: servers refuse to seal with it from now on; put a new key there and restart them');
        }
      });
      return;
    }
    case 'secrets-key:rotate': {
      const config = loadConfig();
      if (config.secretsKey) {
        throw new UsageError('The secrets key comes from LOTPROOF_SECRETS_KEY: set the new key there and the old one in LOTPROOF_SECRETS_KEY_PREVIOUS, then restart the servers; the start seals every stored secret again.');
      }
      await withDatabase(async (db) => {
        rotateSecretsKeyFile(config.dataDir);
        const r = await resealWebhookSecrets(db.sequelize, secretBox(config));
        console.log(`new secrets key in ${config.dataDir}/secrets-key (the old one kept as secrets-key.previous); ${r.resealed} stored secret(s) sealed again${r.unreadable ? `, ${r.unreadable} sealed under a key not known here left as they are` : ''}\nrestart running servers to seal with the new key`);
      });
      return;
    }
    default:
      console.log(USAGE);
      if (command && command !== 'help' && command !== '--help') process.exitCode = 2;
  }
}

main(process.argv.slice(2)).catch((err) => {
  if (err instanceof UsageError || err instanceof ConfigError || err instanceof MissingPackagesError) {
    console.error(err.message);
    process.exitCode = 2;
  } else if (err instanceof Failure) {
    console.error(err.message);
    process.exitCode = 1;
  } else if (err instanceof TypeError && /parseArgs|Unknown option/i.test(String(err.message))) {
    console.error(`${err.message}\n\n${USAGE}`);
    process.exitCode = 2;
  } else {
    console.error(err);
    process.exitCode = 1;
  }
});
