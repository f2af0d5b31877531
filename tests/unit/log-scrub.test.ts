// Issue 14, item 16: error logs carried full SQL text and bind values. Every error the server logs
// — directly, through a request's logger (pino-http), wrapped as the cause of another, or as the
// unique-constraint error Sequelize builds from a row — must carry no SQL and no value, while the
// kind of failure (type, SQLSTATE, constraint) stays readable. The SQL trace log must not carry
// the values Sequelize writes into the statements it builds.
import { Writable } from 'node:stream';
import { pinoHttp } from 'pino-http';
import { DatabaseError, UniqueConstraintError, ValidationErrorItem } from 'sequelize';
import { describe, expect, it } from 'vitest';
import { openDatabase } from '../../server/db/database';
import { createLogger } from '../../server/logger';

// Invented values a leak would show: bind parameters, a row's content, the statement's text.
const SECRET_BIND = 'bind-5f1c-hush-value';
const SECRET_KEY_HASH = '9d0c71aa6b3e0f52c4d1e8a7b6c5d4e3f2a1b0c9d8e7f6a5b4c3d2e1f0a9b8c7';
const SECRET_SKU = 'SKU-CONFIDENTIAL-77';
const SQL = `SELECT id, organisation_id FROM api_keys WHERE token_hash = $1 AND prefix = $2`;

function capture(level = 'trace') {
  const lines: string[] = [];
  const sink = new Writable({
    write(chunk, _enc, cb) {
      lines.push(String(chunk));
      cb();
    },
  });
  return { logger: createLogger(level, sink), lines, text: () => lines.join('') };
}

/** A DatabaseError as Sequelize's postgres dialect builds it from node-postgres's error. */
function databaseError(): DatabaseError {
  const pg = Object.assign(new Error(`invalid input syntax for type uuid: "${SECRET_BIND}"`), {
    name: 'error',
    severity: 'ERROR',
    code: '22P02',
    detail: `Failing row contains (${SECRET_BIND}, ${SECRET_KEY_HASH}).`,
    where: `SQL statement "${SQL}"`,
    internalQuery: SQL,
    routine: 'string_to_uuid',
    sql: SQL,
    parameters: [SECRET_KEY_HASH, SECRET_BIND],
  });
  return new DatabaseError(pg as never);
}

/** A unique violation as Sequelize builds it: the row's values in `fields`, `errors` and the parent's detail. */
function uniqueError(): UniqueConstraintError {
  const pg = Object.assign(new Error('duplicate key value violates unique constraint "products_active_sku"'), {
    name: 'error',
    severity: 'ERROR',
    code: '23505',
    constraint: 'products_active_sku',
    table: 'products',
    detail: `Key (organisation_id, sku)=(0e1d, ${SECRET_SKU}) already exists.`,
    sql: `INSERT INTO "products" ("sku") VALUES ($1)`,
    parameters: [SECRET_SKU],
  });
  const item = new ValidationErrorItem('sku must be unique', 'unique violation', 'sku', SECRET_SKU, { sku: SECRET_SKU } as never, 'not_unique', 'not_unique', [SECRET_SKU]);
  return new UniqueConstraintError({ message: 'Validation error', errors: [item], fields: { sku: SECRET_SKU }, parent: pg as never });
}

function expectClean(text: string): void {
  expect(text.length).toBeGreaterThan(0);
  for (const secret of [SECRET_BIND, SECRET_KEY_HASH, SECRET_SKU, 'token_hash', 'SELECT id', 'INSERT INTO', 'api_keys WHERE']) {
    expect(text, `the log carries ${secret}`).not.toContain(secret);
  }
}

describe('logged errors carry no SQL text and no bind values', () => {
  it('a DatabaseError logged as { err }, as the error itself, and as the cause of another error', () => {
    const { logger, text } = capture();
    logger.error({ err: databaseError() }, 'unexpected error');
    logger.error(databaseError());
    logger.warn({ err: new Error('could not record the verdict', { cause: databaseError() }) }, 'wrapped');
    logger.error({ error: databaseError(), note: 'under another key' }, 'other key');
    expectClean(text());
    const first = JSON.parse(text().split('\n')[0]!);
    // what failed is still there to read
    expect(first.err.type).toBe('DatabaseError');
    expect(first.err.name).toBe('SequelizeDatabaseError');
    expect(first.err.message).toMatch(/invalid input syntax for type uuid/);
    expect(JSON.stringify(first.err)).toContain('22P02');
  });

  it('a unique violation: no value from fields, errors or the detail', () => {
    const { logger, text } = capture();
    logger.error({ err: uniqueError() }, 'unexpected error');
    expectClean(text());
    expect(text()).toContain('products_active_sku');
  });

  it('through a request logger made by pino-http (which sets its own err serializer)', () => {
    const { logger, text } = capture();
    const http = pinoHttp({ logger, quietReqLogger: true, serializers: { req: (r) => ({ id: r.id }) } });
    const reqLogger = http.logger.child({ reqId: 'r-1' });
    reqLogger.error({ err: databaseError() }, 'unexpected error');
    reqLogger.error({ err: uniqueError() }, 'unexpected error');
    expectClean(text());
    expect(text()).toContain('SequelizeDatabaseError');
  });

  it('leaves an error without database parts as it was', () => {
    const { logger, text } = capture();
    const err = Object.assign(new Error('the signing key file "keys/a.pem" is unreadable'), { code: 'EACCES' });
    logger.error({ err }, 'start failed');
    const line = JSON.parse(text());
    expect(line.err).toMatchObject({ type: 'Error', message: 'the signing key file "keys/a.pem" is unreadable', code: 'EACCES' });
    expect(line.err.stack).toMatch(/keys\/a\.pem/);
  });

  it('does not change the error it was given', () => {
    const { logger } = capture();
    const err = databaseError();
    logger.error({ err }, 'x');
    expect(err.sql).toBe(SQL);
    expect(err.parameters).toEqual([SECRET_KEY_HASH, SECRET_BIND]);
  });
});

describe('the SQL trace log carries no values', () => {
  it('masks the literals Sequelize writes into the statements it builds', () => {
    const { logger, text } = capture('trace');
    const db = openDatabase('postgres://nobody@127.0.0.1:1/none', logger);
    // the function Sequelize calls with each statement (its options are not in its type declarations)
    const log = (db.sequelize as unknown as { options: { logging: (sql: string, options?: unknown) => void } }).options.logging;
    log(`Executing (default): SELECT "id" FROM "products" WHERE "organisation_id" = '${SECRET_BIND}' AND "sku" = E'${SECRET_SKU}''s' LIMIT 51;`, {});
    log(`Executing (default): UPDATE "users" SET "password_hash"='${SECRET_KEY_HASH}',"failed"=17 WHERE "id" = 'x'`, { bind: [SECRET_BIND] });
    const out = text();
    expect(out).toContain('sql');
    for (const secret of [SECRET_BIND, SECRET_SKU, SECRET_KEY_HASH, '=17']) expect(out, secret).not.toContain(secret);
    void db.close();
  });
});
