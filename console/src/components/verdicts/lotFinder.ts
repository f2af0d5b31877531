// Finding lots in the verdicts list: what the filters hold, how they sit in the address (so a
// search can be bookmarked and shared) and which listVerdicts query they send. The server does all
// the filtering (lot code and line match a part, in any case); nothing is filtered here.
//
// Two date ranges, because a lot has two dates: when it was packed (packedFrom/packedTo) and when
// its verdict was sealed in the ledger (sealedFrom/sealedTo). The address's older `from`/`to`
// (bookmarks made before the packing range existed) meant the sealing date, and still do.
import type { components, operations } from '../../../../shared/api/schema';
import { DECISIONS, SORTS, dayBoundary, type Sort } from '../../lib/verdictFilters';
import type { Decision } from '../../../../shared/engine/types';

export type VerdictCounts = components['schemas']['VerdictCounts'];
export type Submitter = components['schemas']['Submitter'];
type ListQuery = NonNullable<operations['listVerdicts']['parameters']['query']>;
export type WithdrawalStatus = NonNullable<ListQuery['status']>;

/** The status choices, by the API's enum (the compiler checks that they agree). */
const STATUS_SET: Record<WithdrawalStatus, true> = { withdrawn: true, 'not-withdrawn': true };
export const STATUSES = Object.keys(STATUS_SET) as WithdrawalStatus[];

export interface FinderFilters {
  productId: string;
  line: string;
  decision: Decision | '';
  lotCode: string;
  status: WithdrawalStatus | '';
  /** Days as yyyy-mm-dd, inclusive, in the user's time zone. */
  packedFrom: string;
  packedTo: string;
  sealedFrom: string;
  sealedTo: string;
  sort: Sort;
}

export const NO_FILTERS: FinderFilters = {
  productId: '',
  line: '',
  decision: '',
  lotCode: '',
  status: '',
  packedFrom: '',
  packedTo: '',
  sealedFrom: '',
  sealedTo: '',
  sort: '-recordedAt',
};

/** The listVerdicts text filters' limit (FilterLine, FilterLotCode: maxLength 100). */
export const TEXT_MAX = 100;
/** WithdrawalRequest.reason: minLength 1 (not blank), maxLength 500. */
export const REASON_MAX = 500;

const DAY = /^\d{4}-\d{2}-\d{2}$/;
const one = (v: unknown): string => (Array.isArray(v) ? String(v[0] ?? '') : typeof v === 'string' ? v : '');
const day = (v: unknown): string => (DAY.test(one(v)) ? one(v) : '');

/** Filters from the route's query, dropping anything malformed. */
export function finderFromQuery(query: Record<string, unknown>): FinderFilters {
  const decision = one(query.decision);
  const status = one(query.status);
  const sort = one(query.sort);
  return {
    productId: one(query.product).slice(0, 64),
    line: one(query.line).slice(0, TEXT_MAX),
    decision: (DECISIONS as readonly string[]).includes(decision) ? (decision as Decision) : '',
    lotCode: one(query.lot).slice(0, TEXT_MAX),
    status: (STATUSES as readonly string[]).includes(status) ? (status as WithdrawalStatus) : '',
    packedFrom: day(query.packedFrom),
    packedTo: day(query.packedTo),
    sealedFrom: day(query.sealedFrom) || day(query.from),
    sealedTo: day(query.sealedTo) || day(query.to),
    sort: (SORTS as readonly string[]).includes(sort) ? (sort as Sort) : '-recordedAt',
  };
}

/** The route query for the filters: only what differs from the defaults. */
export function queryFromFinder(f: FinderFilters): Record<string, string> {
  const q: Record<string, string> = {};
  if (f.productId) q.product = f.productId;
  if (f.line.trim()) q.line = f.line.trim();
  if (f.decision) q.decision = f.decision;
  if (f.lotCode.trim()) q.lot = f.lotCode.trim();
  if (f.status) q.status = f.status;
  if (f.packedFrom) q.packedFrom = f.packedFrom;
  if (f.packedTo) q.packedTo = f.packedTo;
  if (f.sealedFrom) q.sealedFrom = f.sealedFrom;
  if (f.sealedTo) q.sealedTo = f.sealedTo;
  if (f.sort !== '-recordedAt') q.sort = f.sort;
  return q;
}

/** True when any filter (not the sort) differs from none. */
export function filtering(f: FinderFilters): boolean {
  return (Object.keys(NO_FILTERS) as (keyof FinderFilters)[]).some((k) => k !== 'sort' && String(f[k]).trim() !== '');
}

/** Problems with the filters the user can fix, by field (empty when there are none). */
export function finderProblems(f: FinderFilters): Partial<Record<'packedTo' | 'sealedTo', string>> {
  const out: Partial<Record<'packedTo' | 'sealedTo', string>> = {};
  if (f.packedFrom && f.packedTo && f.packedFrom > f.packedTo) out.packedTo = 'The last packing day is before the first.';
  if (f.sealedFrom && f.sealedTo && f.sealedFrom > f.sealedTo) out.sealedTo = 'The last sealing day is before the first.';
  return out;
}

/**
 * The listVerdicts (and exportVerdicts) query for the filters. Days become instants at the start
 * of the user's local day; a range's last day runs to the start of the next (the API's `…To` is
 * exclusive). `counts` asks for the summary of everything the filter selects.
 */
export function finderApiQuery(
  f: FinderFilters,
  opts: { cursor?: string | null; limit?: number; counts?: boolean } = {},
): Record<string, string | number | boolean> {
  const q: Record<string, string | number | boolean> = {};
  if (opts.limit !== undefined) q.limit = opts.limit;
  if (f.productId) q.productId = f.productId;
  if (f.line.trim()) q.line = f.line.trim();
  if (f.decision) q.decision = f.decision;
  if (f.lotCode.trim()) q.lotCode = f.lotCode.trim();
  if (f.status) q.status = f.status;
  if (f.packedFrom) q.packedFrom = dayBoundary(f.packedFrom);
  if (f.packedTo) q.packedTo = dayBoundary(f.packedTo, true);
  if (f.sealedFrom) q.sealedFrom = dayBoundary(f.sealedFrom);
  if (f.sealedTo) q.sealedTo = dayBoundary(f.sealedTo, true);
  if (f.sort !== '-recordedAt') q.sort = f.sort;
  if (opts.cursor) q.cursor = opts.cursor;
  if (opts.counts) q.counts = true;
  return q;
}

/** What is wrong with a withdrawal's reason (WithdrawalRequest: 1–500 characters, not blank), or null. */
export function reasonProblem(reason: string): string | null {
  if (!reason.trim()) return 'Say why the verdict is withdrawn.';
  if (reason.length > REASON_MAX) return `At most ${REASON_MAX} characters (this is ${reason.length}).`;
  return null;
}

/** Who sealed a record: a console user by e-mail, an API key by name and visible prefix. */
export function submitterName(s: Submitter): string {
  return s.kind === 'user' ? s.email : `API key “${s.name}” (${s.prefix}…)`;
}
