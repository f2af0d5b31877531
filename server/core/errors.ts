// What can go wrong in a rule, said without HTTP: each area throws one of these, and only
// `server/http/problem.ts` turns them into RFC 9457 problems (status, type, the request's own
// pointers). A field is named by a JSON pointer (RFC 6901) into the input the rule was given, in
// the domain's terms: "/measurements/17", "/fixedTare", "/cursor" — never "/body/…" or "/query/…".

/** One bad field of a rule's input. */
export interface FieldIssue {
  /** JSON pointer into the rule's input, e.g. "/measurements/17"; "" for the input as a whole. */
  field: string;
  detail: string;
}

/** Base of every failure a caller can cause or must hear about. `code` names the failure kind. */
export class Failure extends Error {
  constructor(
    readonly code: string,
    message: string,
    readonly fields: FieldIssue[] = [],
    /** Further facts for the caller (become problem extension members). */
    readonly facts: Record<string, unknown> = {},
  ) {
    super(message);
    this.name = new.target.name;
  }
}

/** The input is malformed: a field is missing, of the wrong form, or out of its range. */
export class InvalidInput extends Failure {
  constructor(message: string, fields: FieldIssue[], code = 'validation') {
    super(code, message, fields);
  }
}

/** The input is well-formed, but the rules refuse to act on it (an archived product, a lot the engine cannot judge). */
export class Refused extends Failure {}

/** The thing named does not exist in the caller's organisation. */
export class NotFound extends Failure {
  constructor(message: string) {
    super('not-found', message);
  }
}

/** The request clashes with what is stored (a duplicate, a state that does not allow it). */
export class Conflict extends Failure {
  constructor(message: string, code = 'conflict', fields: FieldIssue[] = [], facts: Record<string, unknown> = {}) {
    super(code, message, fields, facts);
  }
}

/** The caller is known but may not do this. */
export class NotAllowed extends Failure {
  constructor(message: string, code = 'forbidden') {
    super(code, message);
  }
}

/** The caller is not (or no longer) known: a missing, expired or revoked credential. */
export class NotAuthenticated extends Failure {
  constructor(message: string) {
    super('unauthorized', message);
  }
}

/** The input is larger than the rules accept (a lot of too many measurements). */
export class TooLarge extends Failure {
  constructor(message: string) {
    super('payload-too-large', message);
  }
}

/** The caller has used up a limit; it may try again after `retryAfterSeconds`. */
export class TooMany extends Failure {
  constructor(message: string, readonly retryAfterSeconds: number) {
    super('rate-limited', message);
  }
}

/** Something the rule depends on is not available right now; nothing was stored. */
export class Unavailable extends Failure {
  constructor(message: string) {
    super('unavailable', message);
  }
}
