// The preview before a lot is sent: the same engine the server runs (shared/engine), in the browser,
// on the measurements read from the file. The stored verdict is the server's; this only tells the
// quality engineer what to expect and catches a wrong column or unit before anything is sealed.
import { evaluateLot } from '../../../shared/engine';
import { toNet } from '../../../shared/engine/net';
import type { EngineError, LotData, LotInput, ProductSpec, Unit, Verdict } from '../../../shared/engine/types';
import type { ParsedMeasurements } from './csv';

export interface LotForm {
  lotCode: string;
  line: string;
  lotSize: number | null;
  testing: 'destructive' | 'non-destructive';
  measurementUnit: Unit;
  measurementBasis: 'gross' | 'net';
}

export type Preview =
  | { ok: true; verdict: Verdict; net: number[]; input: LotInput }
  | { ok: false; message: string; pointer: string | null };

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

/** Says an engine error in words, naming the file row when it points at a measurement. */
export function describeEngineError(error: EngineError, hasHeader: boolean): string {
  const m = /^\/lot\/(measurements|tares)\/(\d+)$/.exec(error.pointer);
  if (m) return `Row ${Number(m[2]) + 1 + (hasHeader ? 1 : 0)} of the file: ${error.message}.`;
  return `${error.message.charAt(0).toUpperCase()}${error.message.slice(1)}.`;
}

export function previewLot(product: ProductSpec, form: LotForm, parsed: ParsedMeasurements, extra: { tareSample?: number[] } = {}): Preview {
  if (parsed.problems.length > 0) return { ok: false, message: parsed.problems.join(' '), pointer: null };
  const input: LotInput = { product, lot: lotDataOf(form, parsed, product, extra.tareSample) };
  const result = evaluateLot(input);
  if (!result.ok) return { ok: false, message: describeEngineError(result.error, parsed.hasHeader), pointer: result.error.pointer };
  const net = toNet(input);
  return { ok: true, verdict: result.verdict, net: net.ok ? Array.from(net.data.net) : [], input };
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
