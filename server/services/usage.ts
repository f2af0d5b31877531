// Usage metering: per credential and per UTC day, the requests made, the lots verified and the
// measurements processed. Console sessions are counted together under the nil key id.
import { QueryTypes } from 'sequelize';
import { ApiKey, UsageDay } from '../models';
import type { Principal } from './principal';

/** The key id under which console sessions are counted. */
export const CONSOLE_KEY_ID = '00000000-0000-0000-0000-000000000000';

function keyOf(principal: Principal): string {
  return principal.kind === 'api-key' && principal.keyId ? principal.keyId : CONSOLE_KEY_ID;
}

/** The UTC calendar day of an instant, as YYYY-MM-DD. */
export function utcDay(at: Date): string {
  return at.toISOString().slice(0, 10);
}

async function add(principal: Principal, counts: { requests?: number; lots?: number; measurements?: number }, at: Date): Promise<void> {
  await UsageDay.sequelize!.query(
    `INSERT INTO usage_daily (organisation_id, key_id, day, requests, lots, measurements)
     VALUES (:org, :key, :day, :requests, :lots, :measurements)
     ON CONFLICT (organisation_id, day, key_id) DO UPDATE SET
       requests = usage_daily.requests + EXCLUDED.requests,
       lots = usage_daily.lots + EXCLUDED.lots,
       measurements = usage_daily.measurements + EXCLUDED.measurements`,
    {
      replacements: {
        org: principal.organisationId,
        key: keyOf(principal),
        day: utcDay(at),
        requests: counts.requests ?? 0,
        lots: counts.lots ?? 0,
        measurements: counts.measurements ?? 0,
      },
      type: QueryTypes.INSERT,
    },
  );
}

/** Counts one verified lot and its measurements for the principal's key (or the console) and organisation. */
export async function recordLotUsage(principal: Principal, measurements: number, at = new Date()): Promise<void> {
  if (!Number.isInteger(measurements) || measurements < 0) throw new RangeError('measurements must be a non-negative integer');
  await add(principal, { lots: 1, measurements }, at);
}

/** Counts one API request (called by the HTTP layer for every authenticated request). */
export async function recordRequestUsage(principal: Principal, at = new Date()): Promise<void> {
  await add(principal, { requests: 1 }, at);
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

/** The organisation's usage per key per day between two UTC days (inclusive), newest day first. */
export async function readUsage(organisationId: string, filter: { keyId?: string; from: string; to: string }): Promise<UsageReport> {
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
