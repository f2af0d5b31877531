// Structured logs with pino. Credentials are redacted wherever they could appear.
import { pino, type Logger } from 'pino';

export const REDACT_PATHS = [
  'req.headers.authorization',
  'req.headers.cookie',
  'res.headers["set-cookie"]',
  '*.password',
  '*.secret',
  '*.token',
  '*.apiKey',
];

export function createLogger(level: string, destination?: NodeJS.WritableStream): Logger {
  return pino({ level, redact: { paths: REDACT_PATHS, censor: '[redacted]' }, base: { service: 'lotproof' } }, destination as any);
}
