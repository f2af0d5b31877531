// Outgoing e-mail with nodemailer over SMTP, configured from server/config.ts. In development and
// tests the SMTP server is the local fake (server/platform/smtp-fake.ts) that captures messages.
import nodemailer, { type Transporter } from 'nodemailer';
import type { SmtpConfig } from '../config';
import { capturedMail, type CapturedMail } from '../platform/smtp-fake';

let settings: SmtpConfig | null = null;
let transport: Transporter | null = null;

/** Points the mailer at an SMTP server; called once per app with its configuration. */
export function configureMailer(smtp: SmtpConfig): void {
  if (settings && JSON.stringify(settings) === JSON.stringify(smtp)) return;
  transport?.close();
  settings = smtp;
  transport = nodemailer.createTransport({
    host: smtp.host,
    port: smtp.port,
    secure: smtp.secure,
    auth: smtp.user ? { user: smtp.user, pass: smtp.password ?? '' } : undefined,
    connectionTimeout: 10_000,
    greetingTimeout: 10_000,
    socketTimeout: 20_000,
    logger: false,
    debug: false,
  });
}

export interface Mail {
  to: string;
  subject: string;
  text: string;
  html?: string;
}

export class MailerNotConfiguredError extends Error {}

/** Sends one message; rejects when the SMTP server refuses it or cannot be reached. */
export async function sendMail(mail: Mail): Promise<void> {
  if (!transport || !settings) throw new MailerNotConfiguredError('The mailer has no SMTP settings (configureMailer was not called).');
  await transport.sendMail({ from: settings.from, to: mail.to, subject: mail.subject, text: mail.text, html: mail.html, textEncoding: 'base64' });
}

/** The messages captured by the local SMTP fake of this process (development and tests only). */
export function readDevMailbox(): CapturedMail[] {
  return capturedMail();
}
