/**
 * Runs a short R program with Rscript (Debian r-base-core, the reference library of the planning
 * tests) and reads back lines "id v1 v2 …" written with `out(id, ...)` at 17 significant digits.
 * A missing Rscript throws (a test failure, never a skip).
 */
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

const PRELUDE = 'out <- function(id, ...) cat(id, sprintf("%.17g", c(...)), "\\n")\n';

export function runRScript(program: string): Map<string, number[]> {
  // A file, not `-e`: Rscript refuses a long `-e` argument.
  const dir = mkdtempSync(join(tmpdir(), 'lotproof-planning-r-'));
  let text: string;
  try {
    const file = join(dir, 'program.R');
    writeFileSync(file, PRELUDE + program + '\n');
    text = execFileSync('Rscript', ['--vanilla', file], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'], maxBuffer: 1 << 26 });
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
  const result = new Map<string, number[]>();
  for (const line of text.split('\n')) {
    const parts = line.trim().split(/\s+/);
    if (parts.length < 2) continue;
    result.set(parts[0]!, parts.slice(1).map(Number));
  }
  return result;
}

/** The values R wrote under `id`; throws when it wrote none. */
export function rValues(r: Map<string, number[]>, id: string): number[] {
  const v = r.get(id);
  if (v === undefined) throw new Error(`R wrote no line for ${id}`);
  return v;
}

/** A JS number as R source text, exactly (17 significant digits round-trip a double). */
export const rNum = (x: number): string => x.toPrecision(17);

/**
 * R source of an independent simulation of the eu-76-211 decision, written in the test from the
 * Directive's text (Annex I 1.1–1.3; Annex II 2.2–2.3): a first sample of n1 with mean check
 * x̄ ≥ Qn − λ1·s, none below T2 and at most a1 below T1 accepts; r1 or more below T1 rejects; in
 * between, a second sample of n2 is judged with the first (mean check with λ2 on n1 + n2 packs,
 * none below T2, at most a2 below T1). n2 = 0 for a single plan. R's own generator (set.seed).
 * `sim_eu(...)` returns c(P(accept), its standard error).
 */
export const R_SIM_EU = `
sim_eu <- function(mu, sd, qn, tne, n1, a1, r1, n2, a2, lam1, lam2, N, seed) {
  set.seed(seed)
  t1 <- qn - tne; t2 <- qn - 2 * tne
  accepted <- 0; done <- 0
  while (done < N) {
    k <- min(20000, N - done)
    x1 <- matrix(rnorm(k * n1, mu, sd), k, n1)
    m1 <- rowMeans(x1); s1 <- sqrt(rowSums((x1 - m1)^2) / (n1 - 1))
    c1 <- rowSums(x1 < t1)
    ok1 <- m1 >= qn - lam1 * s1 & rowSums(x1 < t2) == 0
    acc <- ok1 & c1 <= a1
    if (n2 > 0) {
      mid <- ok1 & c1 > a1 & c1 < r1
      x <- cbind(x1, matrix(rnorm(k * n2, mu, sd), k, n2)); n <- n1 + n2
      m <- rowMeans(x); s <- sqrt(rowSums((x - m)^2) / (n - 1))
      acc <- acc | (mid & m >= qn - lam2 * s & rowSums(x < t1) <= a2 & rowSums(x < t2) == 0)
    }
    accepted <- accepted + sum(acc); done <- done + k
  }
  p <- accepted / N
  c(p, sqrt(p * (1 - p) / N))
}
`;
