// Reading verdicts: lists with filters and cursor pagination (newest first), one by id, and the
// re-run of the engine on a stored input. Every query is scoped by the caller's organisation.
import { QueryTypes, type Sequelize } from 'sequelize';
import { ENGINE_VERSION, evaluateLot } from '../../shared/engine';
import { NotFoundProblem } from '../http/problem';
import { canonicalJson } from './canonical';
import { decodeCursor, encodeCursor } from './cursor';
import type { Principal } from './principal';
import { VIEW_COLUMNS, verdictView, type VerdictRecord, type VerdictRow, type VerdictView } from './verdict-records';
import type { components } from '../../shared/api/schema';

export interface VerdictFilter {
  productId?: string;
  line?: string;
  decision?: string;
  lotCode?: string;
  from?: string;
  to?: string;
}

/** SQL conditions and bind values for a filter; `$1` is always the organisation. */
export function filterSql(organisationId: string, f: VerdictFilter): { where: string; bind: unknown[] } {
  const bind: unknown[] = [organisationId];
  const conds = ['organisation_id = $1'];
  const add = (sql: string, v: unknown) => {
    bind.push(v);
    conds.push(sql.replace('?', `$${bind.length}`));
  };
  if (f.productId) add('product_id = ?', f.productId);
  if (f.line !== undefined) add('line = ?', f.line);
  if (f.decision) add('decision = ?', f.decision);
  if (f.lotCode) add('lot_code = ?', f.lotCode);
  if (f.from) add('recorded_at >= ?::timestamptz', f.from);
  if (f.to) add('recorded_at < ?::timestamptz', f.to);
  return { where: conds.join(' AND '), bind };
}

export async function listVerdicts(
  sequelize: Sequelize,
  principal: Principal,
  f: VerdictFilter & { limit: number; cursor?: string },
): Promise<{ items: VerdictView[]; nextCursor: string | null }> {
  const { where, bind } = filterSql(principal.organisationId, f);
  let sql = `SELECT ${VIEW_COLUMNS} FROM verdicts WHERE ${where}`;
  if (f.cursor) {
    const [seq] = decodeCursor(f.cursor, 1);
    bind.push(Number(seq));
    sql += ` AND sequence < $${bind.length}`;
  }
  bind.push(f.limit + 1);
  sql += ` ORDER BY sequence DESC LIMIT $${bind.length}`;
  const rows = await sequelize.query<VerdictRow>(sql, { bind, type: QueryTypes.SELECT });
  const page = rows.slice(0, f.limit);
  const last = page[page.length - 1];
  return { items: page.map(verdictView), nextCursor: rows.length > f.limit && last ? encodeCursor([Number(last.sequence)]) : null };
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
  if (!row) throw new NotFoundProblem(`no verdict ${id} in your organisation`);
  return verdictView(row);
}

/** Where two JSON values differ (JSON pointers, at most `max`). */
function differences(a: unknown, b: unknown, path = '', out: string[] = [], max = 20): string[] {
  if (out.length >= max) return out;
  if (a === b) return out;
  if (typeof a !== 'object' || typeof b !== 'object' || a === null || b === null || Array.isArray(a) !== Array.isArray(b)) {
    out.push(path || '/');
    return out;
  }
  const keys = new Set([...Object.keys(a), ...Object.keys(b)]);
  for (const k of keys) differences((a as Record<string, unknown>)[k], (b as Record<string, unknown>)[k], `${path}/${k}`, out, max);
  return out;
}

export async function recomputeVerdict(sequelize: Sequelize, principal: Principal, id: string): Promise<components['schemas']['Recomputation']> {
  const row = await findVerdictRow(sequelize, principal.organisationId, { id }, true);
  if (!row) throw new NotFoundProblem(`no verdict ${id} in your organisation`);
  const record = JSON.parse(row.record!) as VerdictRecord;
  const again = evaluateLot(record.input);
  const recorded = record.result;
  if (!again.ok) {
    return {
      verdictId: id,
      matches: false,
      recordedEngineVersion: record.engine.version,
      currentEngineVersion: ENGINE_VERSION,
      recordedDecision: recorded.decision,
      recomputedDecision: null,
      differences: [`engine refused the stored input: ${again.error.message} (${again.error.pointer})`],
    };
  }
  const same = canonicalJson(again.verdict) === canonicalJson(recorded);
  return {
    verdictId: id,
    matches: same,
    recordedEngineVersion: record.engine.version,
    currentEngineVersion: ENGINE_VERSION,
    recordedDecision: recorded.decision,
    recomputedDecision: again.verdict.decision,
    differences: same ? [] : differences(recorded, again.verdict),
  };
}
