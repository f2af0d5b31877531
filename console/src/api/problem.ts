// RFC 9457 problem details as the console shows them: a sentence for the page and one per field.
import type { components } from '../../../shared/api/schema';
import { plainFieldMessage } from '../lib/formValidation';

export type Problem = components['schemas']['Problem'];

/** A failed API call, carrying the server's problem details (or one made up for a network failure). */
export class ApiError extends Error {
  readonly problem: Problem;
  constructor(problem: Problem) {
    super(problem.detail ?? problem.title);
    this.name = 'ApiError';
    this.problem = problem;
  }
  get status(): number {
    return this.problem.status;
  }
}

export function isProblem(v: unknown): v is Problem {
  return typeof v === 'object' && v !== null && typeof (v as Problem).title === 'string' && typeof (v as Problem).status === 'number';
}

/** Any thrown value turned into problem details, so every view shows errors the same way. */
export function toProblem(err: unknown): Problem {
  if (err instanceof ApiError) return err.problem;
  if (isProblem(err)) return err;
  const message = err instanceof Error ? err.message : String(err);
  return {
    type: 'about:blank',
    title: 'The service could not be reached',
    status: 0,
    detail: `${message}. Check the connection and try again.`,
  };
}

/**
 * Field messages keyed by the field's JSON pointer within the request body ("/nominalQuantity",
 * "/measurements/3"). Pointers the validator reports as "/body/…" lose that prefix.
 */
export function fieldErrors(problem: Problem | null | undefined): Record<string, string> {
  const out: Record<string, string> = {};
  for (const e of problem?.errors ?? []) {
    const key = e.pointer.replace(/^#/, '').replace(/^\/body(?=\/|$)/, '') || '/';
    // The validator's wording ("must NOT have fewer than 3 characters") in the user's words.
    const text = plainFieldMessage(key, e.detail);
    out[key] = out[key] ? `${out[key]} ${text}` : text;
  }
  return out;
}

/** The message for one field, or for any field under it. */
export function errorFor(errors: Record<string, string>, pointer: string): string | undefined {
  if (errors[pointer]) return errors[pointer];
  const nested = Object.entries(errors).filter(([k]) => k.startsWith(`${pointer}/`));
  return nested.length ? nested.map(([, v]) => v).join(' ') : undefined;
}

/** One sentence for a page-level error. */
export function describeProblem(problem: Problem): string {
  const base = problem.detail && problem.detail !== problem.title ? `${problem.title}: ${problem.detail}` : problem.title;
  return base.endsWith('.') ? base : `${base}.`;
}
