// Reading verdicts: lists with filters, a sort and keyset cursor pagination (newest first by default), one by id, and the
// re-run of the engine on a stored input (a big record's on the aside thread, aside-tasks.ts). Every query is scoped by
// the caller's organisation.
import { QueryTypes, type Sequelize } from 'sequelize';
import { runAside } from '../core/aside-thread';
import { InvalidInput, NotFound } from '../core/errors';
import { decodeCursor, encodeCursor } from '../core/cursor';
import type { Principal } from '../core/principal';
import { recomputeRecord, type Recomputation } from './aside-tasks';
import { VIEW_COLUMNS, verdictView, type VerdictRow, type VerdictView } from './verdict-records';

export interface VerdictFilter {
  productId?: string;
  /** Part of the packing line's name, any case. */
  line?: string;
  decision?: string;
  /** Part of the lot code, any case. */
  lotCode?: string;
  /** Sealed at or after / before (`from` and `to` are the older names of sealedFrom and sealedTo). */
  from?: string;
  to?: string;
  sealedFrom?: string;
  sealedTo?: string;
  /** Packed at or after / before (a verdict without a packing time matches neither). */
  packedFrom?: string;
  packedTo?: string;
  /** Withdrawn verdicts only, or those not withdrawn. */
  status?: string;
}

export const VERDICT_STATUSES = ['withdrawn', 'not-withdrawn'] as const;

/** A LIKE pattern that matches `text` anywhere, its own % _ and \ taken literally (ESCAPE '\'). */
export function containsPattern(text: string): string {
  return `%${text.replace(/[\\%_]/g, (c) => `\\${c}`)}%`;
}

/** Whether the verdict read FROM verdicts (unaliased) is withdrawn: a lookup of its withdrawal, never a flag on the sealed row. */
const WITHDRAWN = 'EXISTS (SELECT 1 FROM verdict_withdrawals w WHERE w.verdict_id = verdicts.id)';

/** SQL conditions and bind values for a filter, over `verdicts` unaliased; `$1` is always the organisation. */
export function filterSql(organisationId: string, f: VerdictFilter): { where: string; bind: unknown[] } {
  const bind: unknown[] = [organisationId];
  const conds = ['organisation_id = $1'];
  const add = (sql: string, v: unknown) => {
    bind.push(v);
    conds.push(sql.replace('?', `$${bind.length}`));
  };
  if (f.productId) add('product_id = ?', f.productId);
  // Partial and case-insensitive (issue 16): ILIKE with the user's wildcards escaped.
  if (f.line) add("line ILIKE ? ESCAPE '\\'", containsPattern(f.line));
  if (f.decision) add('decision = ?', f.decision);
  if (f.lotCode) add("lot_code ILIKE ? ESCAPE '\\'", containsPattern(f.lotCode));
  const sealedFrom = f.sealedFrom ?? f.from;
  const sealedTo = f.sealedTo ?? f.to;
  if (sealedFrom) add('recorded_at >= ?::timestamptz', sealedFrom);
  if (sealedTo) add('recorded_at < ?::timestamptz', sealedTo);
  if (f.packedFrom) add('packed_at >= ?::timestamptz', f.packedFrom);
  if (f.packedTo) add('packed_at < ?::timestamptz', f.packedTo);
  if (f.status === 'withdrawn') conds.push(WITHDRAWN);
  if (f.status === 'not-withdrawn') conds.push(`NOT ${WITHDRAWN}`);
  return { where: conds.join(' AND '), bind };
}

/** Both ends of a date range, checked: a range that ends before it starts is a 400 naming its end. */
export function checkRanges(f: VerdictFilter): void {
  const pairs: [string | undefined, string | undefined, string][] = [
    [f.sealedFrom ?? f.from, f.sealedTo ?? f.to, f.sealedTo !== undefined ? '/sealedTo' : '/to'],
    [f.packedFrom, f.packedTo, '/packedTo'],
  ];
  for (const [a, b, field] of pairs) {
    if (a && b && Date.parse(b) < Date.parse(a)) throw new InvalidInput('a date range ends before it starts', [{ field, detail: 'must not be before the start of the range' }]);
  }
}

export interface VerdictCounts {
  total: number;
  conforming: number;
  nonconforming: number;
  awaitingSecondSample: number;
  insufficientData: number;
  withdrawn: number;
}

/**
 * The summary of the verdicts a filter selects, in one query: how many are withdrawn, and of the
 * others how many are conforming, nonconforming, awaiting their second sample (judged
 * second-sample-required, and no second sample sealed yet) or without enough data. The
 * withdrawals and second samples of the organisation are looked up as hashed sets (a handful of
 * rows each), so the cost is one pass over the verdicts the filter selects.
 */
export async function countVerdicts(sequelize: Sequelize, principal: Principal, f: VerdictFilter): Promise<VerdictCounts> {
  const { where, bind } = filterSql(principal.organisationId, f);
  const [row] = await sequelize.query<Record<keyof VerdictCounts, number>>(
    `SELECT count(*)::int AS total,
            count(*) FILTER (WHERE NOT withdrawn AND decision = 'conforming')::int AS conforming,
            count(*) FILTER (WHERE NOT withdrawn AND decision = 'nonconforming')::int AS nonconforming,
            count(*) FILTER (WHERE NOT withdrawn AND decision = 'second-sample-required' AND NOT seconded)::int AS "awaitingSecondSample",
            count(*) FILTER (WHERE NOT withdrawn AND decision = 'insufficient-data')::int AS "insufficientData",
            count(*) FILTER (WHERE withdrawn)::int AS withdrawn
     FROM (SELECT decision,
                  id IN (SELECT w.verdict_id FROM verdict_withdrawals w WHERE w.organisation_id = $1) AS withdrawn,
                  decision = 'second-sample-required'
                    AND id IN (SELECT s.first_sample_verdict_id FROM verdicts s WHERE s.organisation_id = $1 AND s.first_sample_verdict_id IS NOT NULL) AS seconded
           FROM verdicts WHERE ${where}) x`,
    { bind, type: QueryTypes.SELECT },
  );
  return row as VerdictCounts;
}

/** The orders `listVerdicts` offers (the OpenAPI `sort` enum): a field, `-` for descending. */
export const VERDICT_SORTS = ['recordedAt', '-recordedAt', 'lotCode', '-lotCode', 'decision', '-decision', 'packedAt', '-packedAt'] as const;
export type VerdictSort = (typeof VERDICT_SORTS)[number];

/** The column behind each sort field, the cast its cursor value takes, and whether it may be NULL. */
const SORT_KEYS: Record<string, { column: string; cast: string; nullable: boolean }> = {
  recordedAt: { column: 'recorded_at', cast: 'timestamptz', nullable: false },
  lotCode: { column: 'lot_code', cast: 'text', nullable: false },
  decision: { column: 'decision', cast: 'text', nullable: false },
  packedAt: { column: 'packed_at', cast: 'timestamptz', nullable: true },
};

export function isVerdictSort(v: unknown): v is VerdictSort {
  return typeof v === 'string' && (VERDICT_SORTS as readonly string[]).includes(v);
}

const badCursor = () =>
  new InvalidInput('the cursor is not one this API returned for this sort', [
    { field: '/cursor', detail: 'not a valid cursor for this sort' },
  ]);

/**
 * Cursor of a sorted page: [sort, key present (1/0), key as text, sequence]. The key is the exact
 * text PostgreSQL gave (timestamps at full precision), so the keyset comparison never rounds.
 */
function decodeSortCursor(cursor: string, sort: VerdictSort, cast: string): { key: string | null; sequence: number } {
  const [s, has, key, seq] = decodeCursor(cursor, 4);
  if (s !== sort || (has !== 0 && has !== 1) || typeof key !== 'string' || typeof seq !== 'number' || !Number.isSafeInteger(seq)) throw badCursor();
  // A forged key must never reach PostgreSQL as something it refuses (that would be a 5xx).
  if (has === 1 && (key.includes('\u0000') || (cast === 'timestamptz' && !isTimestampText(key)))) throw badCursor();
  return { key: has === 1 ? key : null, sequence: seq };
}

/** A timestamp as `to_json(timestamptz)` writes it, with every field in range. */
function isTimestampText(t: string): boolean {
  const m = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2}):(\d{2})(\.\d{1,6})?([+-])(\d{2}):(\d{2})$/.exec(t);
  if (!m) return false;
  const [y, mo, d, h, mi, sec, , , oh, om] = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10].map((i) => Number(m[i]));
  const daysInMonth = new Date(Date.UTC(y!, mo!, 0)).getUTCDate();
  return y! >= 1 && mo! >= 1 && mo! <= 12 && d! >= 1 && d! <= daysInMonth && h! < 24 && mi! < 60 && sec! < 60 && oh! <= 15 && om! < 60;
}

export async function listVerdicts(
  sequelize: Sequelize,
  principal: Principal,
  f: VerdictFilter & { limit: number; cursor?: string; sort?: VerdictSort; counts?: boolean },
): Promise<{ items: VerdictView[]; nextCursor: string | null; counts?: VerdictCounts }> {
  checkRanges(f);
  if (f.counts) {
    const [page, counts] = await Promise.all([listVerdicts(sequelize, principal, { ...f, counts: false }), countVerdicts(sequelize, principal, f)]);
    return { ...page, counts };
  }
  const sort: VerdictSort = f.sort ?? '-recordedAt';
  const desc = sort.startsWith('-');
  const { column, cast, nullable } = SORT_KEYS[desc ? sort.slice(1) : sort]!;
  const { where, bind } = filterSql(principal.organisationId, f);
  // Keyset pagination on (key, sequence): sequence is unique within an organisation, so ties on
  // the key keep ledger order and no verdict is skipped or repeated. NULL keys come last.
  let sql = `SELECT ${VIEW_COLUMNS}, to_json(${column}) #>> '{}' AS sort_key FROM verdicts WHERE ${where}`;
  if (f.cursor) {
    const c = decodeSortCursor(f.cursor, sort, cast);
    const cmp = desc ? '<' : '>';
    bind.push(c.sequence);
    const seqParam = `$${bind.length}`;
    if (c.key === null) {
      if (!nullable) throw badCursor();
      sql += ` AND ${column} IS NULL AND sequence ${cmp} ${seqParam}`;
    } else {
      bind.push(c.key);
      const keyParam = `$${bind.length}::${cast}`;
      const after = `(${column} ${cmp} ${keyParam} OR (${column} = ${keyParam} AND sequence ${cmp} ${seqParam}))`;
      sql += nullable ? ` AND (${after} OR ${column} IS NULL)` : ` AND ${after}`;
    }
  }
  bind.push(f.limit + 1);
  const dir = desc ? 'DESC' : 'ASC';
  sql += ` ORDER BY ${column} ${dir}${nullable ? ' NULLS LAST' : ''}, sequence ${dir} LIMIT $${bind.length}`;
  const rows = await sequelize.query<VerdictRow & { sort_key: string | null }>(sql, { bind, type: QueryTypes.SELECT });
  const page = rows.slice(0, f.limit);
  const last = page[page.length - 1];
  const nextCursor =
    rows.length > f.limit && last ? encodeCursor([sort, last.sort_key === null ? 0 : 1, last.sort_key ?? '', Number(last.sequence)]) : null;
  return { items: page.map(verdictView), nextCursor };
}

export async function findVerdictRow(
  sequelize: Sequelize,
  organisationId: string,
  by: { id: string } | { seal: string },
  withRecord = false,
): Promise<VerdictRow | null> {
  const [col, val] = 'id' in by ? ['id', by.id] : ['seal', by.seal.toLowerCase()];
  const rows = await sequelize.query<VerdictRow>(
    `SELECT ${VIEW_COLUMNS}${withRecord ? ', record' : ''} FROM verdicts WHERE organisation_id = $1 AND ${col} = $2`,
    { bind: [organisationId, val], type: QueryTypes.SELECT },
  );
  return rows[0] ?? null;
}

export async function getVerdict(sequelize: Sequelize, principal: Principal, id: string): Promise<VerdictView> {
  const row = await findVerdictRow(sequelize, principal.organisationId, { id });
  if (!row) throw new NotFound(`no verdict ${id} in your organisation`);
  return verdictView(row);
}

/**
 * Records of more than this many bytes are re-judged on the aside thread. Parsing and judging a
 * record costs about 0.5 ms per thousand measurements on the main thread (a 1 000 000-measurement
 * lot held the event loop for 350–590 ms); up to this (some 30 000 measurements) it stays well
 * under the 100 ms /healthz budget, and posting the text there would cost more than it saves.
 */
export const RECOMPUTE_ASIDE_MIN_BYTES = 256 * 1024;
/**
 * A big record is read in slices of this many characters: reading one from PostgreSQL costs the
 * main thread a few milliseconds (decoding its bytes into a string), where the whole 7 MB record
 * of a million measurements, read at once, held it for 60–120 ms.
 */
const RECORD_SLICE_CHARS = 512 * 1024;

export async function recomputeVerdict(sequelize: Sequelize, principal: Principal, id: string): Promise<Recomputation> {
  const org = principal.organisationId;
  // octet_length reads a stored record's size without reading the record.
  const [row] = await sequelize.query<{ record: string | null }>(
    'SELECT CASE WHEN octet_length(record) <= $3 THEN record END AS record FROM verdicts WHERE organisation_id = $1 AND id = $2',
    { bind: [org, id, RECOMPUTE_ASIDE_MIN_BYTES], type: QueryTypes.SELECT },
  );
  if (!row) throw new NotFound(`no verdict ${id} in your organisation`);
  if (row.record !== null) return recomputeRecord.run({ verdictId: id, parts: [row.record] }).value;
  // Verdict rows never change (a trigger refuses UPDATE), so the slices are of one record.
  const parts: string[] = [];
  for (let from = 1; ; from += RECORD_SLICE_CHARS) {
    const [slice] = await sequelize.query<{ part: string }>(
      'SELECT substr(record, $3, $4) AS part FROM verdicts WHERE organisation_id = $1 AND id = $2',
      { bind: [org, id, from, RECORD_SLICE_CHARS], type: QueryTypes.SELECT },
    );
    const part = slice?.part ?? '';
    if (part) parts.push(part);
    if (part.length < RECORD_SLICE_CHARS) break;
  }
  return runAside(recomputeRecord, { verdictId: id, parts });
}
