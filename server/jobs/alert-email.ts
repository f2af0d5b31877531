// Sends the alert e-mail for a nonconforming lot to the product's recipients (one message each).
// On the job side's own pool, like the webhook deliveries.
import { sendMail } from '../core/mailer';
import type { JobDeps } from './webhook-delivery';

export async function deliverAlertEmail(deps: JobDeps, emailId: string): Promise<void> {
  const { rows } = await deps.db.query<{ id: string; recipients: string[]; subject: string; body: string; sent_at: Date | null }>(
    'SELECT id, recipients, subject, body, sent_at FROM alert_emails WHERE id = $1',
    [emailId],
  );
  const m = rows[0];
  if (!m || m.sent_at) return;
  for (const to of m.recipients) await sendMail({ to, subject: m.subject, text: m.body });
  await deps.db.query('UPDATE alert_emails SET sent_at = now() WHERE id = $1', [m.id]);
}
