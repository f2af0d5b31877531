/**
 * Engines kept for recomputing sealed records. A verdict records the engine version it was judged
 * with (`engineVersion`); re-judging it with today's engine would differ wherever a rulebook was
 * corrected since. `evaluateLotAs` judges with the engine of that version when it is kept here,
 * and returns null when it is not (then the caller may re-judge with today's engine and report the
 * difference). Each kept engine is a frozen copy of its rulebooks and evaluator; the statistics it
 * calls (t test, descriptive statistics, assumption checks, net quantities) are today's, whose
 * results for the same input have not changed since (tests/engine/kept-engines.test.ts holds the
 * copies to verdicts sealed by the engines themselves).
 */
import type { EngineResult, LotInput } from '../types';
import { ENGINE_VERSION } from '../version';
import { evaluateLot } from '../evaluate';
import { evaluateLot as evaluateLot112 } from './engine-1-1-2/evaluate';
import type { LotInput as LotInput112 } from './engine-1-1-2/types';

const KEPT: Readonly<Record<string, (input: LotInput) => EngineResult>> = {
  '1.1.2': (input) => evaluateLot112(input as unknown as LotInput112) as unknown as EngineResult,
  [ENGINE_VERSION]: evaluateLot,
};

/** The engine versions a sealed record can be re-judged with, today's last. */
export const KEPT_ENGINE_VERSIONS: readonly string[] = Object.keys(KEPT);

/** Judges `input` with the engine of `version`; null when that engine is not kept. */
export function evaluateLotAs(version: string, input: LotInput): EngineResult | null {
  const engine = Object.prototype.hasOwnProperty.call(KEPT, version) ? KEPT[version] : undefined;
  return engine === undefined ? null : engine(input);
}
