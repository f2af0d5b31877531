// The verdicts area's heavy pure work, as tasks of the aside thread (core/aside-thread.ts): judging
// a lot and building its record's canonical parts, and re-judging a stored record. A big lot or
// record runs there, so the event loop keeps serving; a small one runs the same function here,
// inline. Nothing in this module does I/O: it is loaded in the worker too.
import { ENGINE_VERSION, evaluateLot, type LotInput } from '../../shared/engine';
import type { components } from '../../shared/api/schema';
import { asideTask, type AsideResult } from '../core/aside-thread';
import type { IdempotencyClaim } from '../core/idempotency';
import { canonicalJson } from './canonical';
import type { PendingVerdict } from './ledger';
import { checkPlausibility, netValuesOf, type PlausibilityBand, type PlausibilityRecord } from '../../shared/plausibility';
import { assembleVerdict, type JudgedLot } from './verdict-assembly';
import type { VerdictRecord } from './verdict-records';

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

export type Recomputation = components['schemas']['Recomputation'];

/** Re-judges a stored record (its canonical JSON text, in slices) and compares the result with the sealed one. */
export const recomputeRecord = asideTask(import.meta.url, 'recomputeRecord', ({ verdictId, parts }: { verdictId: string; parts: string[] }): AsideResult<Recomputation> => {
  const record = JSON.parse(parts.join('')) as VerdictRecord;
  const again = evaluateLot(record.input);
  const recorded = record.result;
  if (!again.ok) {
    return {
      value: {
        verdictId,
        matches: false,
        recordedEngineVersion: record.engine.version,
        currentEngineVersion: ENGINE_VERSION,
        recordedDecision: recorded.decision,
        recomputedDecision: null,
        differences: [`engine refused the stored input: ${again.error.message} (${again.error.pointer})`],
      },
    };
  }
  const same = canonicalJson(again.verdict) === canonicalJson(recorded);
  return {
    value: {
      verdictId,
      matches: same,
      recordedEngineVersion: record.engine.version,
      currentEngineVersion: ENGINE_VERSION,
      recordedDecision: recorded.decision,
      recomputedDecision: again.verdict.decision,
      differences: same ? [] : differences(recorded, again.verdict),
    },
  };
});

/**
 * A lot to judge: everything of the judged lot but its result and its plausibility check (made here,
 * on the same values), with the band to check against; its number arrays may be Float64Arrays
 * (moved here, not copied).
 */
export type LotToJudge = Omit<JudgedLot, 'result' | 'plausibility'> & { band: PlausibilityBand; confirmImplausible: boolean };
export type Judgement =
  | { ok: true; pending: PendingVerdict }
  | { ok: false; error: { code: string; message: string; pointer: string }; implausible?: { check: PlausibilityRecord; net: number[] } };

/** Values of a lot's arrays a lot must hold before it is judged on the aside thread (about 5–10 ms of work here). */
export const JUDGE_ASIDE_MIN_VALUES = 32_768;

/** How many values the lot's arrays hold, and their buffers when they are typed arrays (to move them to the aside thread). */
export function lotArrays(input: LotInput): { values: number; buffers: ArrayBuffer[] } {
  let values = 0;
  const buffers = new Set<ArrayBuffer>();
  for (const v of Object.values(input.lot)) {
    if (Array.isArray(v)) values += v.length;
    else if (ArrayBuffer.isView(v)) {
      values += (v as Float64Array).length;
      buffers.add(v.buffer as ArrayBuffer);
    }
  }
  return { values, buffers: [...buffers] };
}

/** A typed array as the plain array of numbers the engine and the record take. */
function plainNumbers(v: Float64Array): number[] {
  // (filled in place: twice as fast as push, and four times as fast as Array.from, for a million)
  const out = new Array<number>(v.length);
  for (let i = 0; i < v.length; i++) out[i] = v[i]!;
  return out;
}

/**
 * Judges a lot with the engine and assembles what the ledger seals (the record's canonical
 * parts and the row); the engine's refusal is returned, not thrown. The parts' big buffers are
 * moved back, not copied.
 */
export const judgeLot = asideTask(import.meta.url, 'judgeLot', ({ lot, claim }: { lot: LotToJudge; claim: IdempotencyClaim | null }): AsideResult<Judgement> => {
  const data = { ...lot.input.lot } as Record<string, unknown>;
  for (const [k, v] of Object.entries(data)) if (ArrayBuffer.isView(v)) data[k] = plainNumbers(v as Float64Array);
  const input: LotInput = { product: lot.input.product, lot: data as unknown as LotInput['lot'] };
  // Plausibility first: a slip of the keyboard is no lot to judge, unless the submitter confirmed it.
  const plausibility = checkPlausibility(input, lot.band, lot.confirmImplausible);
  if (plausibility && plausibility.implausibleCount > 0 && !lot.confirmImplausible) {
    const first = plausibility.implausiblePacks[0]!;
    const error = { code: 'implausible-measurement', message: `measurement ${first} is outside the plausible band`, pointer: `/lot/measurements/${first}` };
    return { value: { ok: false, error, implausible: { check: plausibility, net: netValuesOf(input, plausibility.implausiblePacks) } } };
  }
  const judged = evaluateLot(input);
  if (!judged.ok) return { value: { ok: false, error: judged.error } };
  const { band: _band, confirmImplausible: _confirmed, ...facts } = lot;
  const pending = assembleVerdict({ ...facts, input, plausibility, result: judged.verdict }, claim);
  const transfer = new Set<ArrayBuffer>();
  for (const b of pending.parts.values()) {
    // a part with a buffer of its own (a big one); a small part shares Node's pool, and is copied
    if (b.byteLength >= 64 * 1024 && b.byteOffset === 0 && b.byteLength === b.buffer.byteLength) transfer.add(b.buffer as ArrayBuffer);
  }
  return { value: { ok: true, pending }, transfer: [...transfer] };
});

/** A pending verdict as it arrives from the aside thread: its parts become Buffers again (a structured clone gives Uint8Arrays). */
export function pendingFromAside(p: PendingVerdict): PendingVerdict {
  const parts = new Map<string, Buffer>();
  for (const [k, u] of p.parts as Map<string, Uint8Array>) parts.set(k, Buffer.isBuffer(u) ? u : Buffer.from(u.buffer, u.byteOffset, u.byteLength));
  return { ...p, parts };
}
