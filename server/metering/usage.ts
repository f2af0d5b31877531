// Usage metering: per credential and per UTC day, the requests made, the lots verified and the
// measurements processed. Console sessions are counted together under the nil key id. The counts
// are gathered in memory and written about once a second (usage-buffer.speedup.ts).
import { QueryTypes } from 'sequelize';
import { UsageDay } from './models';
import { countUsage, flushUsage } from './usage-buffer.speedup';
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

/** Counts one verified lot and its measurements for the principal's key (or the console) and organisation. */
export async function recordLotUsage(principal: Principal, measurements: number, at = new Date()): Promise<void> {
  if (!Number.isInteger(measurements) || measurements < 0) throw new RangeError('measurements must be a non-negative integer');
  countUsage(principal.organisationId, keyOf(principal), utcDay(at), { lots: 1, measurements });
}

/** Counts one API request (called by the HTTP layer for every authenticated request). */
export async function recordRequestUsage(principal: Principal, at = new Date()): Promise<void> {
  countUsage(principal.organisationId, keyOf(principal), utcDay(at), { requests: 1 });
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
  // The key's name and prefix are joined in the same read (set-based, raw SQL; the table is the
  // identity area's, read here only for the labels of the report, scoped by the organisation).
  const rows = await UsageDay.sequelize!.query<{ key_id: string; day: string; requests: string; lots: string; measurements: string; key_name: string | null; key_prefix: string | null }>(
    `SELECT u.key_id, to_char(u.day, 'YYYY-MM-DD') AS day, u.requests, u.lots, u.measurements, k.name AS key_name, k.prefix AS key_prefix
     FROM usage_daily u LEFT JOIN api_keys k ON k.id = u.key_id AND k.organisation_id = u.organisation_id
     WHERE u.organisation_id = :org AND u.day BETWEEN :from AND :to ${filter.keyId ? 'AND u.key_id = :key' : ''}
     ORDER BY u.day DESC, u.key_id`,
    { replacements: { org: organisationId, from: filter.from, to: filter.to, key: filter.keyId ?? null }, type: QueryTypes.SELECT },
  );
  const days: UsageRow[] = rows.map((r) => {
    return {
      day: r.day,
      keyId: r.key_id === CONSOLE_KEY_ID ? null : r.key_id,
      keyName: r.key_id === CONSOLE_KEY_ID ? 'Console sessions' : (r.key_name ?? 'deleted key'),
      keyPrefix: r.key_id === CONSOLE_KEY_ID ? null : r.key_prefix,
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
