/**
 * Input checks and gross-to-net conversion.
 *
 * net = (gross − tare) converted from the measurement unit to the declared unit; across mass and
 * volume through the density at 20 °C (net volume = net mass / density; Directive 76/211/EEC
 * Annex I, 2.2 measures volumes at, or corrected to, 20 °C). Tare modes: none (net measured),
 * fixed (one tare for every pack), per-pack (paired gross and tare), sample (the mean of a sample
 * of empty packaging).
 */
import type { EngineError, LotInput, TareMode, Unit } from './types';
import { engineError } from './errors';
import { conversionFactor, dimensionOf, isUnit } from './units';
import { mean } from './stats/mean';
import { sampleStandardDeviation } from './stats/variance';

export interface NetData {
  /** Net quantities in the declared unit: the previous sample (if any) followed by the current one, in production order. */
  net: Float64Array;
  previousCount: number;
  currentCount: number;
  tareApplied: TareMode;
  /** Mean tare in the declared unit (fixed or sample mode), else null. */
  tareMean: number | null;
  /** Standard deviation of the tare sample in the declared unit (sample mode), else null. */
  tareSampleStandardDeviation: number | null;
  /** Packs in the tare sample (sample mode), else 0. */
  tareSampleCount: number;
}

const TARE_MODES: readonly TareMode[] = ['none', 'fixed', 'per-pack', 'sample'];

function isObject(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

/**
 * The largest value a measurement or tare may have, in its unit: no prepackage comes within several
 * orders of magnitude of it (50 kg is 5e7 mg), and below it the sums of squares of a million values
 * stay far inside double precision's range. Above it the statistics would overflow (a variance of
 * Infinity, a standard deviation shown as 0), so such a value is refused, not judged.
 */
export const MAX_VALUE = 1e12;

/** First index of a value that is not a finite number from 0 to MAX_VALUE, or −1. */
function firstBadIndex(values: readonly unknown[]): number {
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (typeof v !== 'number' || !(v >= 0 && v <= MAX_VALUE)) return i;
  }
  return -1;
}

function badValueError(values: readonly unknown[], index: number, pointer: string, what: string): EngineError {
  const v = values[index];
  const shown = typeof v === 'number' ? String(v) : JSON.stringify(v) ?? String(v);
  const finite = typeof v === 'number' && Number.isFinite(v);
  return engineError(
    !finite ? 'measurement-not-finite' : (v as number) < 0 ? 'measurement-negative' : 'measurement-out-of-range',
    `${what} ${index} is ${shown}; every value must be a finite number from 0 to ${MAX_VALUE.toExponential()}`,
    `${pointer}/${index}`,
  );
}

function checkNumberArray(v: unknown, pointer: string, what: string): EngineError | null {
  if (!Array.isArray(v)) return engineError('invalid-type', `${pointer} must be an array of numbers`, pointer);
  const bad = firstBadIndex(v);
  return bad >= 0 ? badValueError(v, bad, pointer, what) : null;
}

/** Structural checks of the product and lot, shared by every rulebook. */
export function validateInput(input: unknown): EngineError | null {
  if (!isObject(input)) return engineError('invalid-type', 'the input must be an object with product and lot', '');
  const { product, lot } = input;
  if (!isObject(product)) return engineError('invalid-type', 'product must be an object', '/product');
  if (!isObject(lot)) return engineError('invalid-type', 'lot must be an object', '/lot');
  if (!isUnit(product.unit)) {
    return engineError('unknown-unit', `unknown declared unit ${JSON.stringify(product.unit)}`, '/product/unit');
  }
  const qn = product.nominalQuantity;
  if (typeof qn !== 'number' || !Number.isFinite(qn) || !(qn > 0)) {
    return engineError('invalid-nominal-quantity', 'the nominal quantity must be a finite number > 0', '/product/nominalQuantity');
  }
  if (!TARE_MODES.includes(product.tareMode as TareMode)) {
    return engineError('unknown-tare-mode', `unknown tare mode ${JSON.stringify(product.tareMode)}`, '/product/tareMode');
  }
  if (!isObject(product.rulebook)) return engineError('invalid-type', 'rulebook must be an object', '/product/rulebook');
  if (!isUnit(lot.measurementUnit)) {
    return engineError('unknown-unit', `unknown measurement unit ${JSON.stringify(lot.measurementUnit)}`, '/lot/measurementUnit');
  }
  if (lot.testing !== 'destructive' && lot.testing !== 'non-destructive') {
    return engineError('invalid-testing', "testing must be 'destructive' or 'non-destructive'", '/lot/testing');
  }
  const lotSize = lot.lotSize;
  if (typeof lotSize !== 'number' || !Number.isInteger(lotSize) || lotSize < 1) {
    return engineError('invalid-lot-size', 'the lot size must be an integer ≥ 1', '/lot/lotSize');
  }
  const mErr = checkNumberArray(lot.measurements, '/lot/measurements', 'measurement');
  if (mErr) return mErr;
  const measurements = lot.measurements as number[];
  if (lot.previousSample !== undefined) {
    const pErr = checkNumberArray(lot.previousSample, '/lot/previousSample', 'previous-sample measurement');
    if (pErr) return pErr;
  }
  const previousCount = Array.isArray(lot.previousSample) ? lot.previousSample.length : 0;
  if (measurements.length + previousCount < 2) {
    return engineError(
      'too-few-measurements',
      `a t test needs at least 2 measurements; got ${measurements.length}`,
      '/lot/measurements',
    );
  }
  if (lotSize < measurements.length + previousCount) {
    return engineError(
      'lot-smaller-than-sample',
      `the lot size ${lotSize} is smaller than the ${measurements.length + previousCount} packs measured`,
      '/lot/lotSize',
    );
  }
  if (lot.measurementBasis !== undefined && lot.measurementBasis !== 'gross' && lot.measurementBasis !== 'net') {
    return engineError('invalid-measurement-basis', "measurementBasis must be 'gross' or 'net'", '/lot/measurementBasis');
  }
  if (product.tareMode === 'none' && lot.measurementBasis === 'gross') {
    return engineError('tare-missing', "gross measurements need a tare mode other than 'none'", '/product/tareMode');
  }
  if (product.tareUnit !== undefined && !isUnit(product.tareUnit)) {
    return engineError('unknown-unit', `unknown tare unit ${JSON.stringify(product.tareUnit)}`, '/product/tareUnit');
  }
  if (product.density !== undefined) {
    const d = product.density;
    if (typeof d !== 'number' || !Number.isFinite(d) || !(d > 0)) {
      return engineError('invalid-density', 'the density must be a finite number > 0 (g/mL at 20 °C)', '/product/density');
    }
  }
  return null;
}

/** Converts validated input to net quantities in the declared unit, or names the first bad value. */
export function toNet(input: LotInput): { ok: true; data: NetData } | { ok: false; error: EngineError } {
  const { product, lot } = input;
  const declared: Unit = product.unit;
  const measured: Unit = lot.measurementUnit;
  const factor = conversionFactor(measured, declared, product.density);
  if (factor === null) {
    return {
      ok: false,
      error: engineError(
        'density-required',
        `declared in ${declared} but measured in ${measured}: the density at 20 °C (g/mL) is required`,
        '/product/density',
      ),
    };
  }
  const basis = lot.measurementBasis ?? (product.tareMode === 'none' ? 'net' : 'gross');
  const mode: TareMode = basis === 'net' ? 'none' : product.tareMode;
  const previous = lot.previousSample ?? [];
  const current = lot.measurements;
  const total = previous.length + current.length;
  const net = new Float64Array(total);
  let tareMean: number | null = null;
  let tareSd: number | null = null;

  let tareToMeasured = 1;
  if (mode !== 'none') {
    const tareUnit = product.tareUnit ?? measured;
    if (dimensionOf(tareUnit) !== dimensionOf(measured)) {
      return {
        ok: false,
        error: engineError('tare-unit-mismatch', `tare in ${tareUnit} cannot be taken off measurements in ${measured}`, '/product/tareUnit'),
      };
    }
    tareToMeasured = conversionFactor(tareUnit, measured) as number;
  }

  const fail = (error: EngineError) => ({ ok: false as const, error });
  let constantTare = 0;
  if (mode === 'fixed') {
    const t = product.fixedTare;
    if (typeof t !== 'number' || !Number.isFinite(t) || t < 0) {
      return fail(engineError('invalid-tare', 'a fixed tare must be a finite number ≥ 0', '/product/fixedTare'));
    }
    constantTare = t * tareToMeasured;
    tareMean = constantTare * factor;
  } else if (mode === 'sample') {
    const err = checkNumberArray(lot.tareSample, '/lot/tareSample', 'tare-sample value');
    if (err) return fail(err);
    const ts = lot.tareSample as number[];
    if (ts.length < 1) return fail(engineError('tare-sample-empty', 'the tare sample is empty', '/lot/tareSample'));
    constantTare = (mean(ts) as number) * tareToMeasured;
    tareMean = constantTare * factor;
    const sd = sampleStandardDeviation(ts);
    tareSd = sd === null ? null : sd * tareToMeasured * factor;
  } else if (mode === 'per-pack') {
    const err = checkNumberArray(lot.tares, '/lot/tares', 'tare');
    if (err) return fail(err);
    const tares = lot.tares as number[];
    if (tares.length !== current.length) {
      return fail(
        engineError('tare-count-mismatch', `${tares.length} tares for ${current.length} measurements`, '/lot/tares'),
      );
    }
    if (previous.length > 0) {
      const perr = checkNumberArray(lot.previousTares, '/lot/previousTares', 'previous tare');
      if (perr) return fail(perr);
      const pt = lot.previousTares as number[];
      if (pt.length !== previous.length) {
        return fail(
          engineError('tare-count-mismatch', `${pt.length} tares for ${previous.length} previous measurements`, '/lot/previousTares'),
        );
      }
    }
  }

  const fill = (values: readonly number[], tares: readonly number[] | null, offset: number, pointer: string) => {
    if (tares === null && constantTare === 0) {
      // net measured (or zero tare): values are already checked finite and ≥ 0
      if (factor === 1) net.set(values, offset);
      else for (let i = 0; i < values.length; i++) net[offset + i] = values[i]! * factor;
      return null;
    }
    for (let i = 0; i < values.length; i++) {
      const tare = tares === null ? constantTare : tares[i]! * tareToMeasured;
      const v = (values[i]! - tare) * factor;
      if (v < 0) {
        return engineError(
          'net-negative',
          `measurement ${i} (${values[i]}) is smaller than its tare (${tare}), so its net quantity is negative`,
          `${pointer}/${i}`,
        );
      }
      net[offset + i] = v;
    }
    return null;
  };
  const perPack = mode === 'per-pack';
  const e1 = fill(previous, perPack ? (lot.previousTares ?? null) : null, 0, '/lot/previousSample');
  if (e1) return fail(e1);
  const e2 = fill(current, perPack ? (lot.tares ?? null) : null, previous.length, '/lot/measurements');
  if (e2) return fail(e2);

  return {
    ok: true,
    data: {
      net,
      previousCount: previous.length,
      currentCount: current.length,
      tareApplied: mode,
      tareMean,
      tareSampleStandardDeviation: tareSd,
      tareSampleCount: mode === 'sample' ? (lot.tareSample as number[]).length : 0,
    },
  };
}
