// Usage metering: per credential and per UTC day, the requests made, the lots verified and the
// measurements processed. Console sessions are counted together under the nil key id.
import { QueryTypes } from 'sequelize';
import { onDatabaseClose } from '../db/database';
import { ApiKey } from '../identity/api-key-model';
import { UsageDay } from './models';
import { InvalidInput } from '../core/errors';
import type { Principal } from '../core/principal';

/** The key id under which console sessions are counted. */
export const CONSOLE_KEY_ID = '00000000-0000-0000-0000-000000000000';

function keyOf(principal: Principal): string {
  return principal.kind === 'api-key' && principal.keyId ? principal.keyId : CONSOLE_KEY_ID;
}

/** The UTC calendar day of an instant, as YYYY-MM-DD. */
export function utcDay(at: Date): string {
  return at.toISOString().slice(0, 10);
}

// Counts are gathered in memory per process and written in one multi-row upsert about once a second
// (and before every read of the usage, and when the database is closed). Writing them on every
// request put every request of a key behind the same hot row, one commit at a time: that, not the
// ledger, capped lots per second. The price: a crash (not a clean stop) can lose the last second of
// counts. Usage is metering, not a record anyone relies on for a verdict, so that is acceptable;
// verdicts and the ledger are committed durably on their own path.
interface Counts {
  organisationId: string;
  keyId: string;
  day: string;
  requests: number;
  lots: number;
  measurements: number;
}

const FLUSH_AFTER_MS = 1_000;
let pending = new Map<string, Counts>();
let timer: NodeJS.Timeout | null = null;
let flushing: Promise<void> = Promise.resolve();

function add(principal: Principal, counts: { requests?: number; lots?: number; measurements?: number }, at: Date): void {
  const key = keyOf(principal);
  const day = utcDay(at);
  const id = `${principal.organisationId}\n${key}\n${day}`;
  let c = pending.get(id);
  if (!c) pending.set(id, (c = { organisationId: principal.organisationId, keyId: key, day, requests: 0, lots: 0, measurements: 0 }));
  c.requests += counts.requests ?? 0;
  c.lots += counts.lots ?? 0;
  c.measurements += counts.measurements ?? 0;
  scheduleFlush();
}

function scheduleFlush(): void {
  if (timer) return;
  timer = setTimeout(() => void flushUsage().catch(() => {}), FLUSH_AFTER_MS);
  timer.unref();
}

async function write(batch: Map<string, Counts>): Promise<void> {
  // Sorted, so two processes flushing the same rows take their locks in the same order.
  const rows = [...batch.entries()].sort((a, b) => (a[0] < b[0] ? -1 : 1)).map(([, c]) => c);
  await UsageDay.sequelize!.query(
    `INSERT INTO usage_daily (organisation_id, key_id, day, requests, lots, measurements)
     SELECT u.* FROM unnest($1::uuid[], $2::uuid[], $3::date[], $4::bigint[], $5::bigint[], $6::bigint[]) AS u(o, k, d, r, l, m)
     JOIN organisations org ON org.id = u.o -- an organisation removed meanwhile takes its counts with it
     ON CONFLICT (organisation_id, day, key_id) DO UPDATE SET
       requests = usage_daily.requests + EXCLUDED.requests,
       lots = usage_daily.lots + EXCLUDED.lots,
       measurements = usage_daily.measurements + EXCLUDED.measurements`,
    {
      bind: [
        rows.map((r) => r.organisationId),
        rows.map((r) => r.keyId),
        rows.map((r) => r.day),
        rows.map((r) => r.requests),
        rows.map((r) => r.lots),
        rows.map((r) => r.measurements),
      ],
      type: QueryTypes.INSERT,
    },
  );
}

/**
 * Writes the counts gathered so far in this process (one statement). Reads of the usage call it
 * first, so a caller sees its own requests; on failure the counts are kept for the next flush.
 */
export function flushUsage(): Promise<void> {
  const run = async () => {
    if (timer) clearTimeout(timer);
    timer = null;
    if (pending.size === 0) return;
    const batch = pending;
    pending = new Map();
    try {
      await write(batch);
    } catch (err) {
      for (const [id, c] of batch) {
        const now = pending.get(id);
        if (!now) pending.set(id, c);
        else {
          now.requests += c.requests;
          now.lots += c.lots;
          now.measurements += c.measurements;
        }
      }
      scheduleFlush();
      throw err;
    }
  };
  // One flush at a time, in order: a read waits for the flush before it, then its own.
  const next = flushing.catch(() => {}).then(run);
  flushing = next;
  return next;
}

onDatabaseClose(() => flushUsage().catch(() => {}));

/** Counts one verified lot and its measurements for the principal's key (or the console) and organisation. */
export async function recordLotUsage(principal: Principal, measurements: number, at = new Date()): Promise<void> {
  if (!Number.isInteger(measurements) || measurements < 0) throw new RangeError('measurements must be a non-negative integer');
  add(principal, { lots: 1, measurements }, at);
}

/** Counts one API request (called by the HTTP layer for every authenticated request). */
export async function recordRequestUsage(principal: Principal, at = new Date()): Promise<void> {
  add(principal, { requests: 1 }, at);
}

export interface UsageRow {
  day: string;
  keyId: string | null;
  keyName: string;
  keyPrefix: string | null;
  requests: number;
  lots: number;
  measurements: number;
}

export interface UsageReport {
  from: string;
  to: string;
  days: UsageRow[];
  totals: { requests: number; lots: number; measurements: number };
}

/** Most days one usage report covers. */
export const MAX_USAGE_DAYS = 366;

/** The days a report covers: `to` defaults to today (UTC), `from` to 30 days before `to`. */
export function usageRange(asked: { from?: string; to?: string }, today = new Date()): { from: string; to: string } {
  const to = asked.to ?? utcDay(today);
  const from = asked.from ?? utcDay(new Date(Date.parse(`${to}T00:00:00Z`) - 30 * 86_400_000));
  const span = (Date.parse(`${to}T00:00:00Z`) - Date.parse(`${from}T00:00:00Z`)) / 86_400_000;
  if (span < 0) throw new InvalidInput('from must not be after to.', [{ field: '/from', detail: 'after to' }]);
  if (span >= MAX_USAGE_DAYS) throw new InvalidInput(`At most ${MAX_USAGE_DAYS} days at once.`, [{ field: '/from', detail: 'range too long' }]);
  return { from, to };
}

/** The organisation's usage per key per day between two UTC days (inclusive), newest day first. */
export async function readUsage(organisationId: string, asked: { keyId?: string; from?: string; to?: string }): Promise<UsageReport> {
  const filter = { ...usageRange(asked), keyId: asked.keyId };
  await flushUsage();
  const rows = await UsageDay.sequelize!.query<{ key_id: string; day: string; requests: string; lots: string; measurements: string }>(
    `SELECT key_id, to_char(day, 'YYYY-MM-DD') AS day, requests, lots, measurements FROM usage_daily
     WHERE organisation_id = :org AND day BETWEEN :from AND :to ${filter.keyId ? 'AND key_id = :key' : ''}
     ORDER BY day DESC, key_id`,
    { replacements: { org: organisationId, from: filter.from, to: filter.to, key: filter.keyId ?? null }, type: QueryTypes.SELECT },
  );
  const keyIds = [...new Set(rows.map((r) => r.key_id).filter((k) => k !== CONSOLE_KEY_ID))];
  const keys = keyIds.length ? await ApiKey.findAll({ where: { organisationId, id: keyIds } }) : [];
  const byId = new Map(keys.map((k) => [k.id, k]));
  const days: UsageRow[] = rows.map((r) => {
    const key = byId.get(r.key_id);
    return {
      day: r.day,
      keyId: r.key_id === CONSOLE_KEY_ID ? null : r.key_id,
      keyName: r.key_id === CONSOLE_KEY_ID ? 'Console sessions' : (key?.name ?? 'deleted key'),
      keyPrefix: key ? key.prefix : null,
      requests: Number(r.requests),
      lots: Number(r.lots),
      measurements: Number(r.measurements),
    };
  });
  const totals = days.reduce(
    (t, d) => ({ requests: t.requests + d.requests, lots: t.lots + d.lots, measurements: t.measurements + d.measurements }),
    { requests: 0, lots: 0, measurements: 0 },
  );
  return { from: filter.from, to: filter.to, days, totals };
}
