// The HTTP side of replies and of the request facts the areas need: bodies that are already JSON
// text (a stored reply, a sealed verdict), the Idempotency-Key claim a request makes, and paging.
import { createHash } from 'node:crypto';
import type { Request, Response } from 'express';
import type { IdempotencyClaim, StoredReply } from '../core/idempotency';

export function sendJsonText(res: Response, status: number, body: string, replayed = false): void {
  if (replayed) res.setHeader('Idempotent-Replayed', 'true');
  res.status(status).type('application/json').send(body);
}

export function sendStored(res: Response, r: StoredReply): void {
  sendJsonText(res, r.status, r.body, r.replayed);
}

/**
 * The one fingerprint an Idempotency-Key is bound to: SHA-256 of the request as sent — its media
 * kind, then (for a text/csv body, whose lot fields travel as query parameters) the sorted query,
 * then the body's bytes. A body is hashed as read (`rawBody`, kept by request-body.ts: a JSON body
 * as received, a CSV body as UTF-8 without a BOM), never serialised again: the same bytes replay,
 * other bytes are another request.
 */
export function requestFingerprint(req: Request): string {
  const h = createHash('sha256');
  if (req.is('text/csv')) {
    h.update('csv\n').update(JSON.stringify(Object.entries(req.query as Record<string, unknown>).sort())).update('\n').update(req.rawBody ?? '');
  } else {
    h.update('json\n').update(req.rawBody ?? '');
  }
  return h.digest('hex');
}

/** The claim of a request that carries an Idempotency-Key, or null without one. */
export function idempotencyClaim(req: Request, operation: string): IdempotencyClaim | null {
  const key = req.get('Idempotency-Key');
  if (!key) return null;
  return { organisationId: req.principal!.organisationId, operation, key, requestHash: requestFingerprint(req) };
}

/** The page a list operation asks for (the validator has checked the values). */
export function pageOf(q: Record<string, unknown>): { limit: number; cursor?: string } {
  return { limit: Number(q.limit ?? 50), cursor: typeof q.cursor === 'string' ? q.cursor : undefined };
}
