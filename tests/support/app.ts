// Test support: the real app on the test run's PostgreSQL (DATABASE_URL set by tests/run.ts).
import { randomUUID } from 'node:crypto';
import { Writable } from 'node:stream';
import type { Express } from 'express';
import { createApp } from '../../server/app';
import { loadConfig, type Config } from '../../server/config';
import { openDatabase, type Database } from '../../server/db/database';
import type { AppContext } from '../../server/http/context';
import { createLogger } from '../../server/logger';
import { Organisation } from '../../server/models';
import { issueApiKey } from '../../server/identity/api-key-store';
import type { Scope } from '../../server/core/principal';

export function testDatabaseUrl(): string {
  const url = process.env.DATABASE_URL;
  if (!url) throw new Error('DATABASE_URL is not set: run the suite with `npm test`, which starts a throwaway cluster.');
  return url;
}

/** The tables' owner (migrations, DDL), set by tests/run.ts; the app's own role is DATABASE_URL's. */
export function testOwnerUrl(): string {
  const url = process.env.LOTPROOF_TEST_OWNER_URL;
  if (!url) throw new Error('LOTPROOF_TEST_OWNER_URL is not set: run the suite with `npm test`.');
  return url;
}

/** The cluster's superuser, for tests that play the database administrator (or create databases). */
export function testSuperuserUrl(): string {
  const url = process.env.LOTPROOF_TEST_SUPERUSER_URL;
  if (!url) throw new Error('LOTPROOF_TEST_SUPERUSER_URL is not set: run the suite with `npm test`.');
  return url;
}

export interface TestApp {
  app: Express;
  ctx: AppContext;
  /** Every log line written while the app ran (for "no secrets in logs" checks). */
  logs: string[];
  close: () => Promise<void>;
}

export function testConfig(overrides: Partial<Config> = {}): Config {
  return { ...loadConfig({ ...process.env, NODE_ENV: 'test' }), validateResponses: true, seedDemo: false, ...overrides };
}

export function buildTestApp(overrides: Partial<Config> = {}, db?: Database): TestApp {
  const logs: string[] = [];
  const sink = new Writable({
    write(chunk, _enc, cb) {
      logs.push(String(chunk));
      cb();
    },
  });
  const config = testConfig(overrides);
  const logger = createLogger('debug', sink);
  const database = db ?? openDatabase(config.databaseUrl ?? testDatabaseUrl(), logger, 10);
  const ctx: AppContext = { config: { ...config, databaseUrl: config.databaseUrl ?? testDatabaseUrl() }, db: database, logger };
  return { app: createApp(ctx), ctx, logs, close: () => database.close() };
}

/** A fresh organisation with a unique slug, so test files never see one another's rows. */
export async function createTestOrganisation(name = 'Test packer'): Promise<Organisation> {
  const slug = `t-${randomUUID().slice(0, 18)}`;
  return Organisation.create({ name, slug });
}

export async function createTestKey(organisationId: string, scopes: Scope[], extra: { expiresAt?: Date } = {}): Promise<string> {
  const { secret } = await issueApiKey({ organisationId, name: `test ${scopes.join(' ')}`, scopes, ...extra });
  return secret;
}

/** Serves the app on a free loopback port, for clients that speak real HTTP. */
export async function listenOnLoopback(app: Express): Promise<{ url: string; close: () => Promise<void> }> {
  const { createServer } = await import('node:http');
  const server = createServer(app);
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', () => resolve()));
  const port = (server.address() as import('node:net').AddressInfo).port;
  return { url: `http://127.0.0.1:${port}`, close: () => new Promise<void>((r) => server.close(() => r())) };
}
