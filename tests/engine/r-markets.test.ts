/**
 * Every rulebook's mean statistic against R (Debian r-base-core: mean, sd, qt, t.test) on random
 * lots from the seeded generator (reference/datasets.ts), in one Rscript call. The engine's mean
 * criterion — its observed value and its limit — is recomputed here from R's mean(x), sd(x) and,
 * where the rulebook computes its factor, R's qt; printed factors are the texts' own (markets.md,
 * section named beside each). Tolerance 1e-10 relative.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { runR, type RTask } from './reference/runR';
import { SeededRandom, SHAPES, generate } from './reference/datasets';
import { evaluateLot, type RulebookChoice, type Verdict } from '../../shared/engine';
import { CA_T, CA_T_OVER_ROOT_N } from '../../shared/engine/rulebooks/caWmRegs';

interface Lot {
  id: string;
  rulebook: RulebookChoice;
  lotSize: number;
  x: number[];
  /** The factor's source: printed value, or R's qt at (p, df) divided by √n, or interpolation (Canada), or none (every pack). */
  factor: { printed: number } | { qt: number } | { interpolated: true } | { none: true };
}

const QN = 500;
const rng = new SeededRandom(20261204);
const lots: Lot[] = [];
function add(id: string, rulebook: RulebookChoice, lotSize: number, n: number, factor: Lot['factor']): void {
  const shape = SHAPES[lots.length % SHAPES.length]!;
  const x = generate(rng, n, shape, QN + 2 + rng.next() * 2, 1 + rng.next() * 3);
  lots.push({ id: `${id}-${lots.length}`, rulebook, lotSize, x, factor });
}

// EU and UK: λ printed for n 30, 50, 20 (Directive Annex II 2.3.3; SI 2006/659 Sch. 2 para 4.5–4.6; markets.md §1.4)
for (const id of ['eu-76-211', 'uk-2006-659'] as const) {
  add(id, { id }, 400, 30, { printed: 0.503 });
  add(id, { id }, 2000, 50, { printed: 0.379 });
  add(id, { id }, 400, 37, { qt: 0.995 });
  add(id, { id }, 4000, 80, { qt: 0.995 });
  add(id, { id }, 60, 60, { none: true }); // every pack of a lot under 100: x̄ ≥ Qn
}
// R 87 plan as China prints it (JJF 1070 附表4; markets.md §1.4, §6), shared by OIML, Australia, China
for (const id of ['oiml-r87-2016', 'au-ntmr-2009', 'cn-jjf-1070'] as const) {
  add(id, { id }, 30, 10, { printed: 1.028 });
  add(id, { id }, 70, 13, { printed: 0.848 });
  add(id, { id }, 300, 50, { printed: 0.379 });
  add(id, { id }, 2000, 80, { printed: 0.295 });
  add(id, { id }, 5000, 125, { printed: 0.234 });
  add(id, { id }, 300, 57, { qt: 0.995 });
}
// New Zealand Sch. 7A Table 1: the printed c of the lot's row for its n (markets.md §5)
for (const [lotSize, n, c] of [[20, 12, 0.746], [60, 12, 0.826], [100, 12, 0.86], [200, 32, 0.465], [1000, 32, 0.483], [5000, 80, 0.295]] as const) {
  add('nz-wm-regs-1999', { id: 'nz-wm-regs-1999' }, lotSize, n, { printed: c });
}
add('nz-wm-regs-1999', { id: 'nz-wm-regs-1999' }, 1000, 40, { qt: 0.995 });
// Canada Sch. III Part III: t/√n printed, t interpolated between 32 and 125, zero when every unit is sampled (markets.md §3)
add('ca-wm-regs', { id: 'ca-wm-regs' }, 50, 13, { printed: 0.847 });
add('ca-wm-regs', { id: 'ca-wm-regs' }, 2000, 32, { printed: 0.485 });
add('ca-wm-regs', { id: 'ca-wm-regs' }, 5000, 64, { printed: 0.332 });
add('ca-wm-regs', { id: 'ca-wm-regs' }, 2000, 45, { interpolated: true });
add('ca-wm-regs', { id: 'ca-wm-regs' }, 9000, 110, { interpolated: true });
add('ca-wm-regs', { id: 'ca-wm-regs' }, 20000, 140, { qt: 0.995 });
add('ca-wm-regs', { id: 'ca-wm-regs' }, 9, 9, { none: true });
// United States: SEL = s × SCF, SCF t(0.975; n − 1)/√n computed for lots of 2–10 and for more packages than the plan's
add('us-nist-hb133', { id: 'us-nist-hb133' }, 5, 5, { qt: 0.975 });
add('us-nist-hb133', { id: 'us-nist-hb133' }, 9, 9, { qt: 0.975 });
add('us-nist-hb133', { id: 'us-nist-hb133', params: { mav: 21.7, plan: { sampleSize: 12, sampleCorrectionFactor: 0.635, allowed: 0 } } }, 100, 12, { printed: 0.635 });
add('us-nist-hb133', { id: 'us-nist-hb133', params: { mav: 21.7, plan: { sampleSize: 12, sampleCorrectionFactor: 0.635, allowed: 0 } } }, 100, 17, { qt: 0.975 });

let R: Map<string, (number | null)[]>;
const customLots = Array.from({ length: 12 }, (_, i) => generate(rng, 5 + i * 7, SHAPES[i % SHAPES.length]!, QN + rng.next() * 2 - 1, 2));

beforeAll(() => {
  const tasks: RTask[] = [];
  for (const l of lots) {
    tasks.push({ kind: 'M', id: l.id, x: l.x });
    const n = l.x.length;
    if ('qt' in l.factor) tasks.push({ kind: 'Q', id: `q-${l.id}`, p: l.factor.qt, df: n - 1 });
  }
  customLots.forEach((x, i) => tasks.push({ kind: 'T', id: `custom-${i}`, alternative: 'less', mu: QN, conf: 0.95, x }));
  R = runR(tasks);
}, 120_000);

function verdictOf(l: Lot): Verdict {
  const r = evaluateLot({
    product: { nominalQuantity: QN, unit: 'g', tareMode: 'none', rulebook: l.rulebook },
    lot: { lotSize: l.lotSize, testing: 'non-destructive', measurementUnit: 'g', measurements: l.x },
  });
  if (!r.ok) throw new Error(`${l.id}: ${r.error.code} ${r.error.message}`);
  return r.verdict;
}

function close(label: string, actual: number, expected: number, rel = 1e-10): void {
  if (!(Math.abs(actual - expected) <= rel * Math.max(1, Math.abs(expected)))) throw new Error(`${label}: engine ${actual} vs R ${expected}`);
}

/** Canada's interpolated t/√n from the printed t values (Sch. III Part III), for n between 32 and 125. */
function caInterpolated(n: number): number {
  const listed = [32, 64, 96, 125];
  const below = listed.filter((k) => k < n).pop()!;
  const above = listed.find((k) => k > n)!;
  const [a, b] = [CA_T[below]!, CA_T[above]!];
  const t = a - ((120 / below - 120 / n) / (120 / below - 120 / above)) * (a - b);
  return t / Math.sqrt(n);
}

describe("every rulebook's mean statistic against R's mean, sd and qt", () => {
  it.each([...new Set(lots.map((l) => l.rulebook.id))])('%s', (id) => {
    for (const l of lots.filter((x) => x.rulebook.id === id)) {
      const v = verdictOf(l);
      const mean = v.criteria.find((c) => c.id === 'mean');
      expect(mean, l.id).toBeDefined();
      const [m, s] = R.get(l.id)! as [number, number];
      const n = l.x.length;
      const factor =
        'printed' in l.factor ? l.factor.printed
        : 'qt' in l.factor ? R.get(`q-${l.id}`)![0]! / Math.sqrt(n)
        : 'interpolated' in l.factor ? caInterpolated(n)
        : 0;
      if ('printed' in l.factor && id === 'ca-wm-regs') expect(CA_T_OVER_ROOT_N[n]).toBe(l.factor.printed);
      if (id === 'ca-wm-regs') {
        close(`${l.id} Xa`, mean!.observed, m + s * factor);
        expect(mean!.limit).toBe(QN);
      } else if (id === 'us-nist-hb133') {
        close(`${l.id} average error`, mean!.observed, m - QN);
        close(`${l.id} −SEL`, mean!.limit, -s * factor);
      } else {
        close(`${l.id} mean`, mean!.observed, m);
        close(`${l.id} limit`, mean!.limit, QN - factor * s);
      }
    }
  });

  it('custom: the mean criterion is t.test’s p against α', () => {
    customLots.forEach((x, i) => {
      const r = evaluateLot({
        product: { nominalQuantity: QN, unit: 'g', tareMode: 'none', rulebook: { id: 'custom' } },
        lot: { lotSize: 10000, testing: 'non-destructive', measurementUnit: 'g', measurements: x },
      });
      if (!r.ok) throw new Error(r.error.message);
      close(`custom-${i} p`, r.verdict.criteria.find((c) => c.id === 'mean')!.observed, R.get(`custom-${i}`)![2]!, 1e-10);
    });
  });
});
