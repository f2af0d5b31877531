import type { Criterion, EngineError, LotInput, RulebookChoice, RulebookInfo, TneResult, Unit } from '../types';
import type { MeanTestOptions } from '../inference/meanTest';

/** What a rulebook sees: the validated input and the net quantities in the declared unit. */
export interface JudgeContext {
  input: LotInput;
  /** Net quantities judged (previous sample first, then the current one). */
  net: Float64Array;
  previousCount: number;
  currentCount: number;
  unit: Unit;
  qn: number;
  mean: number;
  standardDeviation: number;
  /** Standard deviation of the tare sample in the declared unit (tare mode 'sample', two or more tares), else null. */
  tareSampleStandardDeviation: number | null;
  /** Mean tare in the declared unit (fixed or sample mode), else null. */
  tareMean: number | null;
  /** Packs in the tare sample (tare mode 'sample'), else 0. */
  tareSampleCount: number;
}

export interface Judgement {
  criteria: Criterion[];
  /** True when the sample is too small for the plan: the verdict is `insufficient-data`. */
  insufficient: boolean;
  /** Set when a double sampling plan needs a second sample. */
  additionalPacks: number | null;
  meanTest: MeanTestOptions & { knownStandardDeviation?: number };
  /**
   * Set by a rulebook whose mean criterion is the mean test's own conclusion (p against α): the
   * index in `criteria` at which the evaluator inserts that criterion once the test has run
   * (see `meanTestCriterion` in ./criteria.ts), with its clause. Absent otherwise.
   */
  meanTestCriterionAt?: number;
  meanTestClause?: string;
  /** TNE (limit of error, MAV) in the declared unit and as its table states it, or null when the rulebook has none. */
  tne: { value: number; baseValue: number; baseUnit: Unit } | null;
  /** The quantity judged against, when it is not the declared nominal quantity (the larger of a dual declaration). */
  nominal?: number;
  /** The rulebook's warnings, in the order the verdict lists them. */
  warnings: string[];
  /** 0-based indices of packs below T1 and below T2 (first 100 each), when the rulebook has a TNE. */
  belowT1Indices?: number[];
  belowT2Indices?: number[];
  /** True when the rulebook has no T2 (twice the TNE) rule: the verdict's t2Limit is null. */
  noT2?: boolean;
}

export interface Rulebook {
  info: RulebookInfo;
  /** Rulebook-specific input checks (units, scope, parameters); null when fine. */
  validate(input: LotInput): EngineError | null;
  judge(ctx: JudgeContext): Judgement | { error: EngineError };
  /** The rulebook's TNE (limit of error, MAV) for a declaration, for previews; absent when it has none. */
  tne?(qn: number, unit: Unit, params: RulebookChoice['params']): TneResult;
}
