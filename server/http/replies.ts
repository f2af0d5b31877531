// Replies whose body is already JSON text (a stored reply, a sealed verdict), and the
// Idempotency-Key a request carries. Used by the route files.
import type { Request, Response } from 'express';
import type { StoredReply } from '../services/idempotency';

export function sendJsonText(res: Response, status: number, body: string, replayed = false): void {
  if (replayed) res.setHeader('Idempotent-Replayed', 'true');
  res.status(status).type('application/json').send(body);
}

export function sendStored(res: Response, r: StoredReply): void {
  sendJsonText(res, r.status, r.body, r.replayed);
}

/** The request's Idempotency-Key, or null without one. */
export function idemKey(req: Request): string | null {
  const k = req.get('Idempotency-Key');
  return k ? k : null;
}
