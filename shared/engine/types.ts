/**
 * Public types of the Lotproof conformance engine.
 *
 * Everything here is plain JSON: no class instances, no NaN, no Infinity, no `undefined` inside
 * arrays. A verdict is canonicalised (RFC 8785) and hashed by the ledger, so every field is
 * computed deterministically from the input (no clocks, no randomness).
 */

/**
 * Declared or measured unit. Mass: g, kg, mg, oz (avoirdupois), lb. Volume: mL, cL, L, fl oz (US),
 * US gal, imp fl oz, imp gal (imperial, as Canada declares). count: articles in a pack.
 */
export type Unit = 'g' | 'kg' | 'mg' | 'mL' | 'cL' | 'L' | 'oz' | 'lb' | 'fl oz' | 'US gal' | 'imp fl oz' | 'imp gal' | 'count';

/** How the tare (packaging) is taken off the gross measurements. */
export type TareMode = 'none' | 'fixed' | 'per-pack' | 'sample';

/** Alternative hypothesis of a one-sample test, relative to the hypothesised mean. */
export type Alternative = 'less' | 'greater' | 'two-sided';

export type RulebookId =
  | 'eu-76-211'
  | 'oiml-r87-2016'
  | 'uk-2006-659'
  | 'ca-wm-regs'
  | 'au-ntmr-2009'
  | 'nz-wm-regs-1999'
  | 'cn-jjf-1070'
  | 'us-nist-hb133'
  | 'custom';

export type Decision = 'conforming' | 'nonconforming' | 'second-sample-required' | 'insufficient-data';

/** An individual-pack limit of the custom rulebook, in the declared unit, with the number of packs allowed beyond it. */
export interface IndividualLimit {
  value: number;
  allowed: number;
}

/** Parameters of the `custom` rulebook. */
export interface CustomRulebookParams {
  /** Significance level of the mean test; default 0.05 (common practice for a plant's own checks). */
  alpha?: number;
  /** Alternative hypothesis; default 'less' (the lot fails when its mean is significantly below target). */
  alternative?: Alternative;
  /** Hypothesised mean in the declared unit; default the nominal quantity. */
  hypothesisedMean?: number;
  /** Known process standard deviation in the declared unit: use a z test instead of the t test. */
  knownStandardDeviation?: number;
  /** Packs with net quantity below `value` count against `allowed` (e.g. a maximum allowable variation rule: value = Qn − MAV). */
  lowerLimit?: IndividualLimit;
  /** Packs with net quantity above `value` count against `allowed`. */
  upperLimit?: IndividualLimit;
  /** Smallest sample the plant accepts for a decision; default 2, never less than 2. */
  minimumSampleSize?: number;
}

/** Parameters of the `eu-76-211` rulebook. */
export interface EuRulebookParams {
  /** Non-destructive sampling plan: the Directive's double plan (default), or the single plan the UK
   *  reference test offers beside it (SI 2006/659 Schedule 2, para 3.3–3.5). */
  nonDestructivePlan?: 'double' | 'single';
}

/** Parameters of the `ca-wm-regs` rulebook. */
export interface CanadaRulebookParams {
  /** Mass of one article in grams, for a count declaration of more than 100 articles (C.R.C. c. 1605 Sch. II Part XIV). */
  articleMass?: number;
}

/** A sampling plan a plant enters from its copy of NIST Handbook 133 (Appendix A). */
export interface UsPlanEntry {
  sampleSize: number;
  /** Sample correction factor (SCF) of the plan. */
  sampleCorrectionFactor: number;
  /** Unreasonable minus errors (packages short by more than the MAV) the plan allows. */
  allowed: number;
}

/** Parameters of the `us-nist-hb133` rulebook. */
export interface UsRulebookParams {
  /** 'A' (default: all packages but USDA-inspected meat and poultry at point of pack) or 'B'. */
  category?: 'A' | 'B';
  /** Maximum allowable variation in the declared unit, as the plant reads it in its copy of HB 133 Appendix A. */
  mav?: number;
  /** The sampling plan, as the plant reads it in its copy of HB 133 Appendix A. */
  plan?: UsPlanEntry;
  /** Moisture allowance of HB 133 Table 2-3, in per cent of the labelled quantity. */
  moistureAllowancePercent?: number;
  /** The other quantity of a dual declaration (e.g. 454 g beside 1 lb): the larger is judged. */
  otherDeclaration?: { quantity: number; unit: Unit };
}

export interface RulebookChoice {
  id: RulebookId;
  /** The chosen rulebook's parameters (see its `parameters`); others are ignored. */
  params?: CustomRulebookParams & EuRulebookParams & CanadaRulebookParams & UsRulebookParams;
}

export interface ProductSpec {
  /** Nominal quantity Qn printed on the label, in `unit`. */
  nominalQuantity: number;
  /** Declared unit of the nominal quantity. */
  unit: Unit;
  tareMode: TareMode;
  /** Tare of every pack when `tareMode` is 'fixed', in `tareUnit`. */
  fixedTare?: number;
  /** Unit of tare values (fixed, per-pack and sample); default the lot's measurement unit. */
  tareUnit?: Unit;
  /** Density of the product in g/mL at 20 °C; required when declared and measured units differ in kind (mass vs volume). */
  density?: number;
  rulebook: RulebookChoice;
}

export interface LotData {
  /** Number of packs in the lot. */
  lotSize: number;
  testing: 'destructive' | 'non-destructive';
  measurementUnit: Unit;
  /** Measurements in production order. */
  measurements: number[];
  /** Whether `measurements` are gross (pack + content) or net; default 'net' when tareMode is 'none', else 'gross'. */
  measurementBasis?: 'gross' | 'net';
  /** Per-pack tares paired with `measurements` (tareMode 'per-pack'). */
  tares?: number[];
  /** Tares of a sample of empty packaging (tareMode 'sample'). */
  tareSample?: number[];
  /** The first sample's measurements, in the same form, when this is the second sample of a double sampling plan. */
  previousSample?: number[];
  /** Per-pack tares paired with `previousSample` (tareMode 'per-pack'). */
  previousTares?: number[];
}

export interface LotInput {
  product: ProductSpec;
  lot: LotData;
}

export interface EngineError {
  /** Stable machine-readable code, e.g. 'measurement-not-finite'. */
  code: string;
  message: string;
  /** JSON pointer (RFC 6901) into the LotInput, e.g. '/lot/measurements/17'. */
  pointer: string;
}

export type EngineResult = { ok: true; verdict: Verdict } | { ok: false; error: EngineError };

/** One acceptance criterion of the rulebook. `passed` is null while a double sampling plan is undecided or the criterion could not be judged. */
export interface Criterion {
  /**
   * 'mean' the mean (average) requirement; 't1' packs short by more than the TNE (limit of error,
   * MAV); 't2' packs short by more than twice it; custom: 'lower-limit', 'upper-limit'.
   */
  id: 'sample-size' | 'mean' | 't1' | 't2' | 'lower-limit' | 'upper-limit';
  observed: number;
  limit: number;
  passed: boolean | null;
  sentence: string;
  /** The rule's source and clause for this criterion (edition included), e.g. "C.R.C. c. 1605 s. 52(4)(c)". */
  clause: string;
  /** Present and true when a number this criterion uses is from memory and not verified against its text. */
  fromMemory?: true;
}

export interface DescriptiveStatistics {
  n: number;
  mean: number;
  /** Sample standard deviation (n − 1 denominator); null when n < 2. */
  standardDeviation: number | null;
  min: number;
  max: number;
  /** Median and quartiles by linear interpolation of order statistics (Hyndman & Fan 1996, definition 7). */
  median: number;
  q1: number;
  q3: number;
  /** Lag-1 autocorrelation in production order; null when n < 2 or the spread is zero. */
  lag1Autocorrelation: number | null;
  unit: Unit;
}

export interface MeanTestResult {
  method: 'one-sample t' | 'one-sample z';
  n: number;
  mean: number;
  /** Sample standard deviation, or the known process standard deviation for the z test. */
  standardDeviation: number;
  standardError: number;
  hypothesisedMean: number;
  alternative: Alternative;
  alpha: number;
  /** Test statistic; null when the standard error is zero (zero spread), decided then by the plain comparison of the mean. */
  statistic: number | null;
  /** Degrees of freedom (n − 1); null for the z test. */
  degreesOfFreedom: number | null;
  pValue: number;
  confidenceLevel: number;
  /** Confidence bound or interval at 1 − α; a side that is unbounded is null. */
  confidenceLower: number | null;
  confidenceUpper: number | null;
  /** Mean minus hypothesised mean. */
  meanDifference: number;
  /** How far the mean falls below the hypothesised mean (0 when it does not). */
  shortfall: number;
  /** Standardised effect size (Cohen's d = mean difference / standard deviation); null when the spread is zero. */
  effectSize: number | null;
  conclusion: 'reject H0' | 'fail to reject H0';
  sentence: string;
}

export interface AssumptionCheck {
  id: 'shapiro-wilk' | 'runs-about-median' | 'lag1-autocorrelation' | 'grubbs' | 'wilcoxon-signed-rank';
  title: string;
  ran: boolean;
  statistic: number | null;
  pValue: number | null;
  /** Plain-language finding, or why the check was not run. */
  finding: string;
  warning: boolean;
  /** Extra numbers of the check (method variant, counts, flagged index); values are numbers, strings or null. */
  details: Record<string, number | string | null>;
}

export interface NetQuantities {
  /** Unit of every net quantity in the verdict (the declared unit). */
  unit: Unit;
  nominalQuantity: number;
  /** Tolerable negative error in the declared unit; null when the rulebook has none (custom). */
  tolerableNegativeError: number | null;
  /** The same TNE in grams, millilitres or articles as the rule states it. */
  tolerableNegativeErrorBase: number | null;
  baseUnit: Unit;
  /** T1 = Qn − TNE and T2 = Qn − 2·TNE. */
  t1Limit: number | null;
  t2Limit: number | null;
  /** Number of net measurements judged (both samples together after a second sample). */
  count: number;
  /** How the tare was taken off ('none' when net was measured). */
  tareApplied: TareMode;
  /** Mean tare used (fixed or sample mode), in the declared unit; null otherwise. */
  tareMean: number | null;
  /** 0-based indices (into the judged measurements) of packs below T1 and below T2, at most 100 each. */
  belowT1Indices: number[];
  belowT2Indices: number[];
}

export interface Verdict {
  decision: Decision;
  secondSample?: { additionalPacks: number };
  criteria: Criterion[];
  statistics: {
    descriptive: DescriptiveStatistics;
    meanTest: MeanTestResult;
  };
  assumptions: AssumptionCheck[];
  net: NetQuantities;
  warnings: string[];
  engineVersion: string;
  rulebook: { id: RulebookId; version: string; title: string; source: string; edition: string; market: string };
  caution: string;
}

export interface RulebookParameterInfo {
  name: string;
  type: 'number' | 'integer' | 'string' | 'object';
  description: string;
  default: number | string | null;
  allowed?: string[];
}

export interface RulebookInfo {
  id: RulebookId;
  version: string;
  title: string;
  source: string;
  /** The edition of the rule implemented (e.g. "SI 2006/659 as made"). */
  edition: string;
  /** The market the rulebook judges for (e.g. "United Kingdom"); "any" for custom and OIML. */
  market: string;
  /** What the rulebook applies to: quantities and units. */
  scope: { description: string; units: Unit[] };
  /** Which parts of the rulebook are from a verified text and which are from memory. */
  provenance: string;
  /** The numbers checked against the published text (or a faithful reproduction), each with its source. */
  verified: string[];
  /** The numbers not read in their text: shipped from memory, labelled so in every verdict that uses them. */
  fromMemory: string[];
  parameters: RulebookParameterInfo[];
}

export type TneResult =
  | { ok: true; value: number; unit: Unit; baseValue: number; baseUnit: Unit; rule: string }
  | { ok: false; reason: string };
