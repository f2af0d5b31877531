/**
 * Runs tests/engine/reference/reference.R with Rscript on a batch of tasks and parses its output.
 * A missing Rscript throws (a test failure, never a skip): R is the reference library of the
 * engine tests (Debian r-base-core, installed by .ci/run).
 */
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

const SCRIPT = fileURLToPath(new URL('./reference.R', import.meta.url));

/** C99 hex-float text of a double (exact), e.g. 500.25 → "0x1.f44p+8". */
export function hexFloat(x: number): string {
  if (x === 0) return Object.is(x, -0) ? '-0x0p+0' : '0x0p+0';
  const view = new DataView(new ArrayBuffer(8));
  view.setFloat64(0, x);
  const hi = view.getUint32(0);
  const lo = view.getUint32(4);
  const sign = hi >>> 31 ? '-' : '';
  const exp = (hi >>> 20) & 0x7ff;
  const mant = ((BigInt(hi & 0xfffff) << 32n) | BigInt(lo)).toString(16).padStart(13, '0').replace(/0+$/, '');
  const lead = exp === 0 ? '0' : '1';
  const e = exp === 0 ? -1022 : exp - 1023;
  return `${sign}0x${lead}${mant ? `.${mant}` : ''}p${e >= 0 ? '+' : ''}${e}`;
}

export type RTask =
  | { kind: 'T'; id: string; alternative: string; mu: number; conf: number; x: ArrayLike<number> }
  | { kind: 'S'; id: string; x: ArrayLike<number> }
  | { kind: 'W'; id: string; alternative: string; mu: number; exact: boolean | null; x: ArrayLike<number> }
  | { kind: 'Q'; id: string; p: number; df: number }
  | { kind: 'P'; id: string; t: number; df: number }
  | { kind: 'B'; id: string; reps: number; x: ArrayLike<number> }
  | { kind: 'M'; id: string; x: ArrayLike<number> };

/** R spells the two-sided alternative 'two.sided'. */
const rAlt = (a: string) => (a === 'two-sided' ? 'two.sided' : a);

function line(t: RTask): string {
  const xs = (x: ArrayLike<number>) => Array.from(x, hexFloat).join(' ');
  switch (t.kind) {
    case 'T':
      return `T ${t.id} ${rAlt(t.alternative)} ${hexFloat(t.mu)} ${hexFloat(t.conf)} ${xs(t.x)}`;
    case 'S':
      return `S ${t.id} ${xs(t.x)}`;
    case 'W':
      return `W ${t.id} ${rAlt(t.alternative)} ${hexFloat(t.mu)} ${t.exact === null ? 'NULL' : t.exact ? 'TRUE' : 'FALSE'} ${xs(t.x)}`;
    case 'Q':
      return `Q ${t.id} ${hexFloat(t.p)} ${hexFloat(t.df)}`;
    case 'P':
      return `P ${t.id} ${hexFloat(t.t)} ${hexFloat(t.df)}`;
    case 'B':
      return `B ${t.id} ${t.reps} ${xs(t.x)}`;
    case 'M':
      return `M ${t.id} ${xs(t.x)}`;
  }
}

/** R's printed number: NA → null, Inf/-Inf → ±Infinity. */
function parseR(v: string): number | null {
  if (v === 'NA') return null;
  if (v === 'Inf') return Number.POSITIVE_INFINITY;
  if (v === '-Inf') return Number.NEGATIVE_INFINITY;
  return Number(v);
}

/** Runs every task in one Rscript call; returns id → values (null for R's NA). */
export function runR(tasks: RTask[]): Map<string, (number | null)[]> {
  const dir = mkdtempSync(join(tmpdir(), 'lotproof-r-'));
  try {
    const input = join(dir, 'in.txt');
    const output = join(dir, 'out.txt');
    writeFileSync(input, tasks.map(line).join('\n') + '\n');
    execFileSync('Rscript', ['--vanilla', SCRIPT, input, output], { stdio: ['ignore', 'ignore', 'pipe'], maxBuffer: 1 << 26 });
    const result = new Map<string, (number | null)[]>();
    for (const l of readFileSync(output, 'utf8').split('\n')) {
      if (!l) continue;
      const [id, ...vals] = l.split(' ');
      result.set(id!, vals.map(parseR));
    }
    return result;
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}
