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
export function lotDataOf(form: LotForm, parsed: ParsedMeasurements, product: ProductSpec): LotData {
  const lot: LotData = {
    lotSize: form.lotSize ?? parsed.measurements.length,
    testing: form.testing,
    measurementUnit: form.measurementUnit,
    measurements: parsed.measurements,
    measurementBasis: product.tareMode === 'none' ? 'net' : form.measurementBasis,
  };
  if (product.tareMode === 'per-pack' && parsed.tares) lot.tares = parsed.tares;
  return lot;
}

/** Says an engine error in words, naming the file row when it points at a measurement. */
export function describeEngineError(error: EngineError, hasHeader: boolean): string {
  const m = /^\/lot\/(measurements|tares)\/(\d+)$/.exec(error.pointer);
  if (m) return `Row ${Number(m[2]) + 1 + (hasHeader ? 1 : 0)} of the file: ${error.message}.`;
  return `${error.message.charAt(0).toUpperCase()}${error.message.slice(1)}.`;
}

export function previewLot(product: ProductSpec, form: LotForm, parsed: ParsedMeasurements, hasHeader = true): Preview {
  if (parsed.problems.length > 0) return { ok: false, message: parsed.problems.join(' '), pointer: null };
  const input: LotInput = { product, lot: lotDataOf(form, parsed, product) };
  const result = evaluateLot(input);
  if (!result.ok) return { ok: false, message: describeEngineError(result.error, hasHeader), pointer: result.error.pointer };
  const net = toNet(input);
  return { ok: true, verdict: result.verdict, net: net.ok ? Array.from(net.data.net) : [], input };
}
