// The verdicts table's filters: kept in the address (so a filtered list can be bookmarked and
// shared), turned into the list operation's query parameters (listVerdicts), and back.
// `sort` is listVerdicts' own `sort` parameter: the server orders the whole list and its cursors
// follow that order, so every page continues the one before.
import type { Decision } from '../../../shared/engine/types';
import type { operations } from '../../../shared/api/schema';

export const DECISIONS: readonly Decision[] = ['conforming', 'nonconforming', 'second-sample-required', 'insufficient-data'];
export type Sort = NonNullable<NonNullable<operations['listVerdicts']['parameters']['query']>['sort']>;
/** Every value of the API's sort enum (the compiler checks that the list and the enum agree). */
const SORT_SET: Record<Sort, true> = {
  '-recordedAt': true,
  recordedAt: true,
  '-packedAt': true,
  packedAt: true,
  lotCode: true,
  '-lotCode': true,
  decision: true,
  '-decision': true,
};
export const SORTS = Object.keys(SORT_SET) as Sort[];
export type SortField = 'recordedAt' | 'packedAt' | 'lotCode' | 'decision';

export interface VerdictFilters {
  productId: string;
  line: string;
  decision: Decision | '';
  /** yyyy-mm-dd, inclusive, in the user's time zone. */
  from: string;
  to: string;
  lotCode: string;
  sort: Sort;
}

export const EMPTY_FILTERS: VerdictFilters = { productId: '', line: '', decision: '', from: '', to: '', lotCode: '', sort: '-recordedAt' };

const DAY = /^\d{4}-\d{2}-\d{2}$/;
const one = (v: unknown): string => (Array.isArray(v) ? String(v[0] ?? '') : typeof v === 'string' ? v : '');

/** Filters from the route's query, dropping anything malformed. */
export function filtersFromQuery(query: Record<string, unknown>): VerdictFilters {
  const decision = one(query.decision);
  const sort = one(query.sort);
  return {
    productId: one(query.product).slice(0, 64),
    line: one(query.line).slice(0, 100),
    decision: (DECISIONS as readonly string[]).includes(decision) ? (decision as Decision) : '',
    from: DAY.test(one(query.from)) ? one(query.from) : '',
    to: DAY.test(one(query.to)) ? one(query.to) : '',
    lotCode: one(query.lot).slice(0, 100),
    sort: (SORTS as readonly string[]).includes(sort) ? (sort as Sort) : '-recordedAt',
  };
}

/** The route query for the filters: only what differs from the defaults. */
export function queryFromFilters(f: VerdictFilters): Record<string, string> {
  const q: Record<string, string> = {};
  if (f.productId) q.product = f.productId;
  if (f.line.trim()) q.line = f.line.trim();
  if (f.decision) q.decision = f.decision;
  if (f.from) q.from = f.from;
  if (f.to) q.to = f.to;
  if (f.lotCode.trim()) q.lot = f.lotCode.trim();
  if (f.sort !== '-recordedAt') q.sort = f.sort;
  return q;
}

/** Start of a local day as an ISO instant; `endOfDay` gives the first instant of the next day. */
export function dayBoundary(day: string, endOfDay = false): string {
  const [y, m, d] = day.split('-').map(Number) as [number, number, number];
  return new Date(y, m - 1, d + (endOfDay ? 1 : 0)).toISOString();
}

/** A problem with the filters the user can fix, or null. */
export function filterProblem(f: VerdictFilters): string | null {
  if (f.from && f.to && f.from > f.to) return 'The “from” day is after the “to” day.';
  return null;
}

/** The list operation's query parameters for the filters (the server filters; nothing is filtered here). */
export function apiQuery(f: VerdictFilters, cursor?: string | null, limit = 25): Record<string, string | number> {
  const q: Record<string, string | number> = { limit };
  if (f.productId) q.productId = f.productId;
  if (f.line.trim()) q.line = f.line.trim();
  if (f.decision) q.decision = f.decision;
  if (f.from) q.from = dayBoundary(f.from);
  if (f.to) q.to = dayBoundary(f.to, true);
  if (f.lotCode.trim()) q.lotCode = f.lotCode.trim();
  if (f.sort !== '-recordedAt') q.sort = f.sort;
  if (cursor) q.cursor = cursor;
  return q;
}

/** The sort a column heading asks for: times newest first, codes and decisions A–Z on the first click; the next click flips it. */
export function nextSort(current: Sort, field: SortField): Sort {
  const first: Sort = field === 'lotCode' || field === 'decision' ? field : `-${field}`;
  const other: Sort = first.startsWith('-') ? (field as Sort) : (`-${field}` as Sort);
  return current === first ? other : first;
}
