// A local SMTP server that accepts every message on loopback and keeps it in memory, so that in
// development and tests e-mail (invitations, password resets) goes through real SMTP without
// leaving the machine. Captured messages are read through the development-only mailbox API.
// Never started in production.
import { randomUUID } from 'node:crypto';
import type { AddressInfo } from 'node:net';
import { SMTPServer } from 'smtp-server';
import type { components } from '../../shared/api/schema';

/** A captured message, exactly as the development mailbox serves it (generated from the OpenAPI document). */
export type CapturedMail = components['schemas']['DevMail'];

export interface RunningSmtpFake {
  host: string;
  port: number;
  messages: () => CapturedMail[];
  stop: () => Promise<void>;
}

const KEEP = 200;
const captured: CapturedMail[] = [];

/** Every message captured by any fake running in this process, newest first. */
export function capturedMail(): CapturedMail[] {
  return [...captured].reverse();
}

// --- a small MIME reader, enough for the messages nodemailer writes ---------------------------

function decodeQuotedPrintable(s: string): Buffer {
  const soft = s.replace(/=\r?\n/g, '');
  const bytes: number[] = [];
  for (let i = 0; i < soft.length; i++) {
    const c = soft[i]!;
    if (c === '=' && /^[0-9A-Fa-f]{2}$/.test(soft.slice(i + 1, i + 3))) {
      bytes.push(parseInt(soft.slice(i + 1, i + 3), 16));
      i += 2;
    } else {
      bytes.push(...Buffer.from(c, 'utf8'));
    }
  }
  return Buffer.from(bytes);
}

/** RFC 2047 encoded words in a header ("=?UTF-8?Q?…?=", "=?UTF-8?B?…?="). */
function decodeHeaderWords(value: string): string {
  return value
    .replace(/\?=\s+=\?/g, '?==?')
    .replace(/=\?([^?]+)\?([BbQq])\?([^?]*)\?=/g, (_m, _charset: string, enc: string, body: string) =>
      enc.toUpperCase() === 'B'
        ? Buffer.from(body, 'base64').toString('utf8')
        : decodeQuotedPrintable(body.replace(/_/g, ' ')).toString('utf8'),
    );
}

interface Part {
  headers: Map<string, string>;
  body: string;
}

function splitPart(raw: string): Part {
  const at = raw.search(/\r?\n\r?\n/);
  const head = at < 0 ? raw : raw.slice(0, at);
  const body = at < 0 ? '' : raw.slice(at).replace(/^\r?\n\r?\n/, '');
  const headers = new Map<string, string>();
  for (const line of head.replace(/\r?\n[ \t]+/g, ' ').split(/\r?\n/)) {
    const colon = line.indexOf(':');
    if (colon > 0) headers.set(line.slice(0, colon).trim().toLowerCase(), line.slice(colon + 1).trim());
  }
  return { headers, body };
}

function decodeBody(part: Part): string {
  const enc = (part.headers.get('content-transfer-encoding') ?? '7bit').toLowerCase();
  if (enc === 'base64') return Buffer.from(part.body.replace(/\s+/g, ''), 'base64').toString('utf8');
  if (enc === 'quoted-printable') return decodeQuotedPrintable(part.body).toString('utf8');
  return part.body;
}

function leaves(part: Part): Part[] {
  const type = part.headers.get('content-type') ?? 'text/plain';
  const boundary = /boundary="?([^";]+)"?/i.exec(type)?.[1];
  if (!/^multipart\//i.test(type) || !boundary) return [part];
  const chunks = part.body.split(`--${boundary}`).slice(1);
  const out: Part[] = [];
  for (const chunk of chunks) {
    if (chunk.startsWith('--')) break;
    // the line break before a boundary belongs to the boundary (RFC 2046 §5.1.1)
    out.push(...leaves(splitPart(chunk.replace(/^\r?\n/, '').replace(/\r?\n$/, ''))));
  }
  return out;
}

/** Reads subject, text and HTML out of a raw RFC 5322 message. */
export function readMessage(raw: string): { subject: string; text: string; html: string | null } {
  const top = splitPart(raw);
  const parts = leaves(top);
  const text = parts.find((p) => /^text\/plain/i.test(p.headers.get('content-type') ?? 'text/plain'));
  const html = parts.find((p) => /^text\/html/i.test(p.headers.get('content-type') ?? ''));
  return {
    subject: decodeHeaderWords(top.headers.get('subject') ?? ''),
    text: text ? decodeBody(text).replace(/\r\n/g, '\n') : '',
    html: html ? decodeBody(html) : null,
  };
}

// --- the server ----------------------------------------------------------------------------------

export async function startSmtpFake(opts: { host?: string; port?: number } = {}): Promise<RunningSmtpFake> {
  const host = opts.host ?? '127.0.0.1';
  if (!/^(127\.\d+\.\d+\.\d+|::1|localhost)$/.test(host)) throw new Error(`The SMTP fake listens on loopback only, not ${host}`);
  const mine: CapturedMail[] = [];
  const server = new SMTPServer({
    authOptional: true,
    disabledCommands: ['STARTTLS', 'AUTH'],
    banner: 'Lotproof development mail catcher',
    size: 5 * 1024 * 1024,
    logger: false,
    onData(stream, session, callback) {
      const chunks: Buffer[] = [];
      stream.on('data', (c: Buffer) => chunks.push(c));
      stream.on('end', () => {
        const { subject, text, html } = readMessage(Buffer.concat(chunks).toString('utf8'));
        const mail: CapturedMail = {
          id: randomUUID(),
          receivedAt: new Date().toISOString(),
          from: session.envelope.mailFrom ? session.envelope.mailFrom.address : '',
          to: session.envelope.rcptTo.map((r) => r.address),
          subject,
          text,
          html,
        };
        mine.push(mail);
        captured.push(mail);
        if (captured.length > KEEP) captured.splice(0, captured.length - KEEP);
        callback();
      });
    },
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(opts.port ?? 0, host, () => resolve());
  });
  server.on('error', () => {});
  const port = (server.server.address() as AddressInfo).port;
  return {
    host,
    port,
    messages: () => [...mine].reverse(),
    stop: () => new Promise<void>((resolve) => server.close(() => resolve())),
  };
}
