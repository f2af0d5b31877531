// Finding lots and withdrawing verdicts in the console (issue 16): the finder's filters to and from
// the address and listVerdicts' query, and the withdrawal reason checked as the API checks it. The
// checks against the API use the OpenAPI document itself (openapi/parts/verdicts.yaml:
// listVerdicts' parameters, WithdrawalRequest), so the console and the server cannot drift apart.
import { describe, expect, it } from 'vitest';
import Ajv from 'ajv';
import { loadApiDocument } from '../../openapi/load';
import {
  NO_FILTERS,
  REASON_MAX,
  STATUSES,
  filtering,
  finderApiQuery,
  finderFromQuery,
  finderProblems,
  queryFromFinder,
  reasonProblem,
  submitterName,
} from '../../console/src/components/verdicts/lotFinder';

const doc = loadApiDocument();
const schemas = doc.components.schemas as Record<string, Record<string, unknown>>;
const params = doc.components.parameters as Record<string, { name: string; schema: Record<string, unknown> }>;
const listParams = (doc.paths['/v1/verdicts'].get.parameters as Array<{ $ref?: string; name?: string }>).map((p) =>
  p.$ref ? params[p.$ref.split('/').pop()!]!.name : p.name!,
);

describe('the lot finder’s filters', () => {
  it('round-trip through the address, dropping malformed values', () => {
    const f = finderFromQuery({ lot: ' l-7 ', line: 'line 2', status: 'withdrawn', packedFrom: '2026-03-01', packedTo: 'soon', sealedTo: '2026-03-31', junk: 'x' });
    expect(f).toEqual({ ...NO_FILTERS, lotCode: ' l-7 ', line: 'line 2', status: 'withdrawn', packedFrom: '2026-03-01', sealedTo: '2026-03-31' });
    expect(queryFromFinder(f)).toEqual({ lot: 'l-7', line: 'line 2', status: 'withdrawn', packedFrom: '2026-03-01', sealedTo: '2026-03-31' });
    expect(finderFromQuery({ status: 'recalled' }).status).toBe('');
    expect(queryFromFinder(NO_FILTERS)).toEqual({});
  });

  it('read an older address’s from/to as the sealing days', () => {
    const f = finderFromQuery({ from: '2026-01-05', to: '2026-01-09' });
    expect([f.sealedFrom, f.sealedTo, f.packedFrom, f.packedTo]).toEqual(['2026-01-05', '2026-01-09', '', '']);
    expect(finderFromQuery({ from: '2026-01-05', sealedFrom: '2026-02-01' }).sealedFrom).toBe('2026-02-01');
  });

  it('ask listVerdicts only with parameters it declares, a range’s last day included', () => {
    const all = { ...NO_FILTERS, productId: 'p', line: 'l', decision: 'conforming' as const, lotCode: 'x', status: 'not-withdrawn' as const, packedFrom: '2026-03-01', packedTo: '2026-03-31', sealedFrom: '2026-04-01', sealedTo: '2026-04-02', sort: 'lotCode' as const };
    const q = finderApiQuery(all, { cursor: 'c', limit: 25, counts: true });
    for (const name of Object.keys(q)) expect(listParams, name).toContain(name);
    expect(q.counts).toBe(true);
    // packedTo is exclusive in the API: the last day runs to the first instant of the next, local time.
    const end = new Date(String(q.packedTo));
    expect([end.getMonth(), end.getDate(), end.getHours()]).toEqual([3, 1, 0]);
    expect(new Date(String(q.sealedFrom)).getDate()).toBe(1);
    expect(finderApiQuery(NO_FILTERS)).toEqual({});
  });

  it('offer exactly the API’s status values', () => {
    expect([...STATUSES].sort()).toEqual([...(params.FilterStatus!.schema.enum as string[])].sort());
  });

  it('say which range runs backwards, and whether any filter is in force', () => {
    expect(finderProblems({ ...NO_FILTERS, packedFrom: '2026-03-02', packedTo: '2026-03-01' })).toEqual({ packedTo: expect.any(String) });
    expect(finderProblems({ ...NO_FILTERS, sealedFrom: '2026-03-02', sealedTo: '2026-03-01' })).toEqual({ sealedTo: expect.any(String) });
    expect(finderProblems({ ...NO_FILTERS, packedFrom: '2026-03-01', packedTo: '2026-03-01' })).toEqual({});
    expect(filtering({ ...NO_FILTERS, sort: 'lotCode' })).toBe(false);
    expect(filtering({ ...NO_FILTERS, status: 'withdrawn' })).toBe(true);
    expect(filtering({ ...NO_FILTERS, lotCode: '   ' })).toBe(false);
  });
});

describe('a withdrawal’s reason', () => {
  const validate = new Ajv({ strict: false }).compile(schemas.WithdrawalRequest!);

  it('is refused by the console exactly where WithdrawalRequest refuses it', () => {
    expect((schemas.WithdrawalRequest!.properties as { reason: { maxLength: number } }).reason.maxLength).toBe(REASON_MAX);
    for (const reason of ['', 'x', 'a'.repeat(REASON_MAX), 'a'.repeat(REASON_MAX + 1)]) {
      expect(reasonProblem(reason) === null, `length ${reason.length}`).toBe(validate({ reason }));
    }
  });

  it('is refused when blank, as the server refuses it (must not be blank)', () => {
    expect(reasonProblem('   \n')).toMatch(/why/);
  });
});

describe('who withdrew a verdict', () => {
  it('names a user by e-mail and an API key by name and visible prefix, never more', () => {
    expect(submitterName({ kind: 'user', userId: '00000000-0000-4000-8000-000000000000', email: 'q@example.test' })).toBe('q@example.test');
    expect(submitterName({ kind: 'api-key', keyId: '00000000-0000-4000-8000-000000000001', name: 'Line 3 gateway', prefix: 'lp_ab12' })).toBe('API key “Line 3 gateway” (lp_ab12…)');
  });
});
