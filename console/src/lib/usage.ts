// Shaping the usage report for the chart: one series per key over every UTC day of the range
// (days without use count 0, so the bars line up), and totals per key for the table's footer.
import type { components } from '../../../shared/api/schema';

export type Metric = 'requests' | 'lots' | 'measurements';

/** One key's use on one UTC day, as the API reports it (generated from the OpenAPI document). */
export type UsageRow = components['schemas']['UsageReport']['days'][number];

/** Every yyyy-mm-dd from `from` to `to`, inclusive (UTC calendar days). */
export function daysBetween(from: string, to: string): string[] {
  const out: string[] = [];
  const end = Date.parse(`${to}T00:00:00Z`);
  for (let t = Date.parse(`${from}T00:00:00Z`); t <= end && out.length < 400; t += 86_400_000) out.push(new Date(t).toISOString().slice(0, 10));
  return out;
}

export interface Series {
  key: string;
  label: string;
  values: number[];
}

export function seriesByKey(rows: readonly UsageRow[], metric: Metric, days: readonly string[]): Series[] {
  const index = new Map(days.map((d, i) => [d, i]));
  const byKey = new Map<string, Series>();
  for (const r of rows) {
    const key = r.keyId ?? 'console';
    let s = byKey.get(key);
    if (!s) {
      s = { key, label: r.keyId === null ? 'Console' : `${r.keyName}${r.keyPrefix ? ` (${r.keyPrefix})` : ''}`, values: days.map(() => 0) };
      byKey.set(key, s);
    }
    const i = index.get(r.day);
    if (i !== undefined) s.values[i]! += r[metric];
  }
  return [...byKey.values()].sort((a, b) => a.label.localeCompare(b.label));
}

/** Default range: the last 31 UTC days up to today. */
export function defaultRange(now = new Date()): { from: string; to: string } {
  const to = now.toISOString().slice(0, 10);
  const from = new Date(now.getTime() - 30 * 86_400_000).toISOString().slice(0, 10);
  return { from, to };
}
