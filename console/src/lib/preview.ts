// The preview before a lot is sent: the same engine the server runs (shared/engine), in the browser,
// on the measurements read from the file. The stored verdict is the server's; this only tells the
// quality engineer what to expect and catches a wrong column or unit before anything is sealed.
import { evaluateLot } from '../../../shared/engine';
import { toNet } from '../../../shared/engine/net';
import type { EngineError, LotData, LotInput, ProductSpec, Unit, Verdict } from '../../../shared/engine/types';
import { checkPlausibility, DEFAULT_PLAUSIBILITY, netValuesOf, type PlausibilityBand } from '../../../shared/plausibility';
import type { ParsedMeasurements } from './csv';

export interface LotForm {
  lotCode: string;
  line: string;
  lotSize: number | null;
  testing: 'destructive' | 'non-destructive';
  measurementUnit: Unit;
  measurementBasis: 'gross' | 'net';
}

/** A pack outside the product's plausible band: its index, the file's line, and its net quantity in the product's unit. */
export interface ImplausiblePack {
  index: number;
  line: number | null;
  net: number;
}

/** The plausibility check as the server makes it (shared/plausibility.ts): the band, and the packs outside it (at most 100 named). */
export interface PlausibilityPreview {
  lower: number;
  upper: number;
  unit: Unit;
  count: number;
  packs: ImplausiblePack[];
}

export type Preview =
  | { ok: true; verdict: Verdict; net: number[]; input: LotInput; plausibility: PlausibilityPreview }
  | { ok: false; message: string; pointer: string | null };

/** A first sample's lot, which a second sample's preview judges together with it (from the first's sealed record). */
export interface PreviousSample {
  product: ProductSpec;
  lot: LotData;
}

/** The lot part of the engine's input, from the form and the parsed file. */
export function lotDataOf(form: LotForm, parsed: ParsedMeasurements, product: ProductSpec, tareSample?: number[]): LotData {
  const lot: LotData = {
    lotSize: form.lotSize ?? parsed.measurements.length,
    testing: form.testing,
    measurementUnit: form.measurementUnit,
    measurements: parsed.measurements,
    measurementBasis: product.tareMode === 'none' ? 'net' : form.measurementBasis,
  };
  if (product.tareMode === 'per-pack' && parsed.tares) lot.tares = parsed.tares;
  if (product.tareMode === 'sample') lot.tareSample = tareSample ?? [];
  return lot;
}

/** Says an engine error in words, naming the file's line when it points at a measurement (`lines`: each measurement's line, as the CSV reader gives them). */
export function describeEngineError(error: EngineError, hasHeader: boolean, lines?: readonly number[]): string {
  const m = /^\/lot\/(measurements|tares)\/(\d+)$/.exec(error.pointer);
  if (m && lines?.[Number(m[2])] !== undefined) return `Line ${lines[Number(m[2])]} of the file: ${error.message}.`;
  if (m) return `Row ${Number(m[2]) + 1 + (hasHeader ? 1 : 0)} of the file: ${error.message}.`;
  return `${error.message.charAt(0).toUpperCase()}${error.message.slice(1)}.`;
}

/** A second sample's input, as the server builds it: the first sample's spec and lot, this sample's values after the first's. */
function secondSampleInput(first: PreviousSample, parsed: ParsedMeasurements): LotInput {
  const fl = first.lot;
  const lot: LotData = {
    lotSize: fl.lotSize,
    testing: fl.testing,
    measurementUnit: fl.measurementUnit,
    ...(fl.measurementBasis ? { measurementBasis: fl.measurementBasis } : {}),
    measurements: parsed.measurements,
    ...(first.product.tareMode === 'per-pack' && parsed.tares ? { tares: parsed.tares } : {}),
    ...(fl.tareSample ? { tareSample: fl.tareSample } : {}),
    previousSample: [...(fl.previousSample ?? []), ...fl.measurements],
    ...(fl.tares ? { previousTares: [...(fl.previousTares ?? []), ...fl.tares] } : {}),
  };
  return { product: first.product, lot };
}

export function previewLot(
  product: ProductSpec,
  form: LotForm,
  parsed: ParsedMeasurements,
  extra: { tareSample?: number[]; band?: PlausibilityBand | null; previous?: PreviousSample | null; source?: 'file' | 'grid' } = {},
): Preview {
  if (parsed.problems.length > 0) return { ok: false, message: parsed.problems.join(' '), pointer: null };
  const input: LotInput = extra.previous ? secondSampleInput(extra.previous, parsed) : { product, lot: lotDataOf(form, parsed, product, extra.tareSample) };
  const result = evaluateLot(input);
  if (!result.ok) {
    // Weights keyed in the grid are packs, not lines of a file.
    const m = extra.source === 'grid' ? /^\/lot\/(measurements|tares)\/(\d+)$/.exec(result.error.pointer) : null;
    const message = m ? `Pack ${Number(m[2]) + 1}${m[1] === 'tares' ? ', tare' : ''}: ${result.error.message}.` : describeEngineError(result.error, parsed.hasHeader, parsed.lines);
    return { ok: false, message, pointer: result.error.pointer };
  }
  const net = toNet(input);
  const check = checkPlausibility(input, extra.band ?? DEFAULT_PLAUSIBILITY, false);
  const values = check ? netValuesOf(input, check.implausiblePacks) : [];
  const plausibility: PlausibilityPreview = {
    lower: check?.lower ?? 0,
    upper: check?.upper ?? 0,
    unit: input.product.unit,
    count: check?.implausibleCount ?? 0,
    packs: (check?.implausiblePacks ?? []).map((index, k) => ({ index, line: parsed.lines?.[index] ?? null, net: values[k]! })),
  };
  return { ok: true, verdict: result.verdict, net: net.ok ? Array.from(net.data.net) : [], input, plausibility };
}

/** The engine's product spec from the API's product (nulls dropped: the engine wants them absent). */
export function productSpecOf(p: {
  nominalQuantity: number;
  unit: Unit;
  tareMode: ProductSpec['tareMode'];
  fixedTare?: number | null;
  tareUnit?: Unit | null;
  density?: number | null;
  rulebook: { id: string; params?: Record<string, unknown> };
}): ProductSpec {
  const spec: ProductSpec = { nominalQuantity: p.nominalQuantity, unit: p.unit, tareMode: p.tareMode, rulebook: p.rulebook as ProductSpec['rulebook'] };
  if (p.fixedTare !== null && p.fixedTare !== undefined) spec.fixedTare = p.fixedTare;
  if (p.tareUnit) spec.tareUnit = p.tareUnit;
  if (p.density !== null && p.density !== undefined) spec.density = p.density;
  return spec;
}

/** Numbers typed into a box, separated by commas, semicolons, spaces or new lines. */
export function parseNumberList(text: string): number[] {
  return text
    .split(/[\s,;]+/)
    .filter(Boolean)
    .map(Number);
}
