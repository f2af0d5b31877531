// The verdicts table's vocabulary: decisions, the sorts listVerdicts takes, the day boundaries of a
// date filter, and the sort a column heading asks for. (The finder's filters themselves, kept in
// the address and turned into listVerdicts' query: components/verdicts/lotFinder.ts.)
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

/** Start of a local day as an ISO instant; `endOfDay` gives the first instant of the next day. */
export function dayBoundary(day: string, endOfDay = false): string {
  const [y, m, d] = day.split('-').map(Number) as [number, number, number];
  return new Date(y, m - 1, d + (endOfDay ? 1 : 0)).toISOString();
}

/** The sort a column heading asks for: times newest first, codes and decisions A–Z on the first click; the next click flips it. */
export function nextSort(current: Sort, field: SortField): Sort {
  const first: Sort = field === 'lotCode' || field === 'decision' ? field : `-${field}`;
  const other: Sort = first.startsWith('-') ? (field as Sort) : (`-${field}` as Sort);
  return current === first ? other : first;
}
