/**
 * The judge shared by the rulebooks of the average system (EU, UK, OIML R 87, Australia, New
 * Zealand, China): a mean criterion x̄ ≥ Qn − λ·s, a count of packs below T1 = Qn − TNE against a
 * sampling plan, and packs below T2 = Qn − 2·TNE against what the rulebook allows. Everything that
 * differs between markets — TNE table, plans and their acceptance numbers, printed factors, the T2
 * allowance, the tare rule, the units, the clauses — is the rulebook's `AverageSystem`; this module
 * names no market.
 *
 * Choices common to every average-system rulebook, stated in the verdict:
 * - every measured pack is used: λ is the factor the text prints for the number measured, or
 *   computed t(0.995; n − 1)/√n where the text prints none; a sample larger than the plan's is
 *   judged with the plan's acceptance number (stricter than the plan, never laxer);
 * - when every pack of the lot is measured, the lot mean is known, so the mean check is x̄ ≥ Qn;
 * - after a second sample the mean check and the T2 check use both samples together.
 */
import type { Criterion, EngineError, LotInput, RulebookInfo, TneResult, Unit } from '../types';
import type { Judgement, JudgeContext, Rulebook } from './types';
import { engineError } from '../errors';
import { formatNumber } from '../format';
import { tneByTable, type TneTable } from './tne';
import {
  countBelow,
  countBelowT1T2,
  meanCriterion,
  meanFactor,
  sampleSizeCriterion,
  t1Criterion,
  t2Criterion,
  tareSpreadWarnings,
  type MeanFactor,
  type TareSpreadRule,
} from './criteria';

export interface StagePlan {
  n: number;
  accept: number;
  reject: number;
}

/** How a lot is checked: every pack, a single sample, or a double plan. */
export type AveragePlan =
  | {
      kind: 'full';
      /** The T1 allowance when the text gives one for a check of every pack; null when it gives none (no T1 criterion). */
      t1: { allowed: number; basis: string; clause: string; fromMemory?: boolean } | null;
      /** 'known': x̄ ≥ Qn; 'none': the text asks no average check of such a lot. */
      mean: 'known' | 'none';
      meanClause: string;
      /** Why the lot is checked in full (for the sentence). */
      why: string;
    }
  | { kind: 'single'; first: StagePlan; meanN: number; source: string; factor?: number }
  | { kind: 'double'; first: StagePlan; second: StagePlan; meanN: number; source: string };

export interface AverageSystem {
  info: RulebookInfo;
  /** The declared units the market allows. */
  units: readonly Unit[];
  /** The TNE table for a declaration in `unit`. */
  tneTable(unit: Unit): TneTable;
  /** The plan for a lot; an error when the rulebook has none for it (e.g. destructive testing of a small lot). */
  plan(input: LotInput): AveragePlan | EngineError;
  /** Factors λ the text prints by sample size, and where. */
  printedFactors: Readonly<Record<number, number>>;
  printedIn: string;
  /** The T1 rule when every pack of a lot the plan would sample is measured. */
  everyPackOfSampledLot(n: number, plan: Exclude<AveragePlan, { kind: 'full' }>): { allowed: number; basis: string; clause: string; fromMemory?: boolean };
  clauses: { mean: string; t1: string; t2: string; sampleSize: string };
  /** Packs allowed below T2 (0 in every average-system text read). */
  t2Allowed: number;
  tareSpread: TareSpreadRule | null;
  /** True when the plan's bands and counts are from memory (labelled in every criterion that uses them). */
  planFromMemory: boolean;
  /** True when the mean criterion's form is from memory (New Zealand's weighted-average formula not read). */
  meanFromMemory?: boolean;
  /** Parameter checks of the rulebook; null when fine. */
  validateParams?(input: LotInput): EngineError | null;
}

const P = '/product';

/** Refuses a declared unit the market does not allow, or a quantity outside the TNE table's scope. */
export function checkDeclaration(input: LotInput, id: string, units: readonly Unit[], tne: (unit: Unit) => TneResult): EngineError | null {
  const unit = input.product.unit;
  if (!units.includes(unit)) {
    return engineError('unit-not-allowed', `${id}: a declaration in ${unit} is not allowed in this market (allowed: ${units.join(', ')})`, `${P}/unit`);
  }
  const r = tne(unit);
  if (!r.ok) return engineError('outside-rulebook-scope', `${id}: ${r.reason}`, `${P}/nominalQuantity`);
  if (unit === 'count' && !Number.isInteger(input.product.nominalQuantity)) {
    return engineError('outside-rulebook-scope', `${id}: a count declaration is a whole number of articles`, `${P}/nominalQuantity`);
  }
  return null;
}

/** A rulebook of the average system from its particulars. */
export function averageSystemRulebook(sys: AverageSystem): Rulebook {
  const id = sys.info.id;
  const tneOf = (qn: number, unit: Unit): TneResult => tneByTable(qn, unit, sys.tneTable(unit));

  function validate(input: LotInput): EngineError | null {
    const decl = checkDeclaration(input, id, sys.units, (u) => tneOf(input.product.nominalQuantity, u));
    if (decl) return decl;
    const params = sys.validateParams?.(input);
    if (params) return params;
    const plan = sys.plan(input);
    if ('code' in plan) return plan;
    if (input.lot.previousSample !== undefined && plan.kind !== 'double') {
      return engineError('second-sample-not-applicable', `${id}: only a double sampling plan takes a second sample`, '/lot/previousSample');
    }
    return null;
  }

  function factorFor(n: number, plan: Exclude<AveragePlan, { kind: 'full' }>): MeanFactor {
    if (plan.kind === 'single' && plan.factor !== undefined && n === plan.first.n) return { value: plan.factor, how: 'printed', source: plan.source };
    return meanFactor(n, sys.printedFactors, sys.printedIn);
  }

  function judge(ctx: JudgeContext): Judgement | { error: EngineError } {
    const { input, net, unit, qn, mean, standardDeviation: sd } = ctx;
    const { lotSize, testing } = input.lot;
    const tneRes = tneOf(qn, unit);
    if (!tneRes.ok) return { error: engineError('outside-rulebook-scope', tneRes.reason, `${P}/nominalQuantity`) };
    const plan = sys.plan(input);
    if ('code' in plan) return { error: plan };
    const tne = tneRes.value;
    const t1Limit = qn - tne;
    const t2Limit = qn - 2 * tne;
    const n = net.length;
    const c = sys.clauses;
    const memoryPlan = sys.planFromMemory;
    const base = {
      meanTest: { hypothesisedMean: qn, alternative: 'less' as const, alpha: 0.005, unit },
      tne: { value: tne, baseValue: tneRes.baseValue, baseUnit: tneRes.baseUnit },
      warnings: tareSpreadWarnings(sys.tareSpread, { standardDeviation: ctx.tareSampleStandardDeviation, mean: ctx.tareMean, count: ctx.tareSampleCount }, tne, qn, unit),
    };
    const tneRule = `TNE ${formatNumber(tneRes.baseValue)} ${tneRes.baseUnit}: ${tneRes.rule}`;
    const t1Clause = `${c.t1}; ${tneRule}`;
    const t2 = (count: number): Criterion => t2Criterion(count, t2Limit, unit, sys.t2Allowed, `${c.t2}; ${tneRule}`);
    const lotText = `for a ${testing} check of a lot of ${lotSize} packs`;
    const finish = (criteria: Criterion[], t1: { indices: number[] }, t2i: { indices: number[] }, additionalPacks: number | null = null): Judgement => ({
      ...base,
      criteria,
      insufficient: false,
      additionalPacks,
      belowT1Indices: t1.indices,
      belowT2Indices: t2i.indices,
    });

    const everyPack = n === lotSize && ctx.previousCount === 0;
    if (plan.kind === 'full') {
      const size = sampleSizeCriterion(n, lotSize, `(every pack: ${plan.why}) ${lotText}`, c.sampleSize, memoryPlan);
      if (n < lotSize) return { ...base, criteria: [size], insufficient: true, additionalPacks: null };
      const [t1, t2c] = countBelowT1T2(net, t1Limit, t2Limit);
      const criteria: Criterion[] = [size];
      if (plan.mean === 'known') criteria.push(meanCriterion(mean, sd, n, qn, null, unit, plan.meanClause, sys.meanFromMemory));
      if (plan.t1 !== null) {
        const r = plan.t1;
        criteria.push(t1Criterion(t1.count, t1Limit, tne, unit, r.allowed, r.allowed + 1, `for a check of every pack (${r.basis})`, `${r.clause}; ${tneRule}`, r.fromMemory));
      } else if (t1.count > 0) {
        base.warnings.push(`${t1.count === 1 ? '1 pack' : `${t1.count} packs`} below T1 = ${formatNumber(t1Limit)} ${unit}: the text sets no T1 allowance for a lot of ${lotSize} checked in full (${plan.meanClause}); the responsible person judges them`);
      }
      if (plan.mean === 'none') base.warnings.push(`no average check for a lot of ${lotSize} packs (${plan.meanClause})`);
      criteria.push(t2(t2c.count));
      return finish(criteria, t1, t2c);
    }

    if (ctx.previousCount > 0) {
      if (plan.kind !== 'double') {
        return { error: engineError('second-sample-not-applicable', 'only the non-destructive double sampling plan takes a second sample', '/lot/previousSample') };
      }
      if (ctx.previousCount < plan.first.n) {
        return {
          error: engineError('previous-sample-size', `the first sample of this plan has ${plan.first.n} packs; previousSample has only ${ctx.previousCount}`, '/lot/previousSample'),
        };
      }
      const firstDefectives = countBelow(net.subarray(0, ctx.previousCount), t1Limit, 0).count;
      if (firstDefectives <= plan.first.accept || firstDefectives >= plan.first.reject) {
        return {
          error: engineError(
            'second-sample-not-required',
            `the first sample has ${firstDefectives} packs below T1, which decides the lot without a second sample`,
            '/lot/previousSample',
          ),
        };
      }
      const size = sampleSizeCriterion(ctx.currentCount, plan.second.n, `in the second sample ${lotText}`, c.sampleSize, memoryPlan);
      if (ctx.currentCount < plan.second.n) return { ...base, criteria: [size], insufficient: true, additionalPacks: null };
      const [t1, t2c] = countBelowT1T2(net, t1Limit, t2Limit);
      const cumulative = ctx.previousCount + ctx.currentCount;
      return finish(
        [
          size,
          meanCriterion(mean, sd, n, qn, factorFor(n, plan), unit, c.mean, sys.meanFromMemory),
          t1Criterion(t1.count, t1Limit, tne, unit, plan.second.accept, plan.second.reject, `in both samples together (${cumulative} packs; ${plan.source})`, t1Clause, memoryPlan),
          t2(t2c.count),
        ],
        t1,
        t2c,
      );
    }

    if (everyPack) {
      const rule = sys.everyPackOfSampledLot(n, plan);
      const size = sampleSizeCriterion(n, lotSize, `(every pack) ${lotText}`, c.sampleSize, memoryPlan);
      const [t1, t2c] = countBelowT1T2(net, t1Limit, t2Limit);
      return finish(
        [
          size,
          meanCriterion(mean, sd, n, qn, null, unit, c.mean, sys.meanFromMemory),
          t1Criterion(t1.count, t1Limit, tne, unit, rule.allowed, rule.allowed + 1, `for a check of every pack (${rule.basis})`, `${rule.clause}; ${tneRule}`, rule.fromMemory),
          t2(t2c.count),
        ],
        t1,
        t2c,
      );
    }

    const required = Math.max(plan.first.n, plan.meanN);
    const size = sampleSizeCriterion(n, required, lotText, c.sampleSize, memoryPlan);
    if (n < required) return { ...base, criteria: [size], insufficient: true, additionalPacks: null };
    const [t1, t2c] = countBelowT1T2(net, t1Limit, t2Limit);
    const larger = n > plan.first.n ? `; applied to all ${n} packs measured` : '';
    const planText = plan.kind === 'single' ? `in a ${testing} sample of ${plan.first.n} (${plan.source}${larger})` : `in a first sample of ${plan.first.n} (${plan.source}${larger})`;
    const t1c = t1Criterion(t1.count, t1Limit, tne, unit, plan.first.accept, plan.first.reject, planText, t1Clause, memoryPlan);
    return finish(
      [size, meanCriterion(mean, sd, n, qn, factorFor(n, plan), unit, c.mean, sys.meanFromMemory), t1c, t2(t2c.count)],
      t1,
      t2c,
      t1c.passed === null && plan.kind === 'double' ? plan.second.n : null,
    );
  }

  return { info: sys.info, validate, judge, tne: (qn, unit) => tneOf(qn, unit) };
}

/** The row of a plan table that holds a lot size. */
export function rowFor<T extends { minLot: number; maxLot: number }>(rows: readonly T[], lotSize: number): T | undefined {
  return rows.find((r) => lotSize >= r.minLot && lotSize <= r.maxLot);
}
