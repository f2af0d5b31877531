// Identity pieces that need no database: password hashing, tokens, the SMTP fake's MIME reader,
// and the identity configuration defaults.
import { describe, expect, it } from 'vitest';
import { loadConfig } from '../../server/config';
import { readMessage } from '../../server/platform/smtp-fake';
import { hashPassword, hashToken, newToken, TOKEN_PATTERN, verifyPassword } from '../../server/identity/credentials';

describe('passwords', () => {
  it('verifies the right password and refuses a wrong one; each hash has its own salt', async () => {
    const a = await hashPassword('a long enough passphrase');
    const b = await hashPassword('a long enough passphrase');
    expect(a).not.toBe(b);
    expect(a).not.toContain('passphrase');
    expect(await verifyPassword('a long enough passphrase', a)).toBe(true);
    expect(await verifyPassword('a long enough passphrasE', a)).toBe(false);
    expect(await verifyPassword('anything', 'not-a-hash')).toBe(false);
  });

  it('treats canonically equivalent Unicode as the same password (NFC)', async () => {
    const stored = await hashPassword('Cafe\u0301 au lait, sans sucre');
    expect(await verifyPassword('Caf\u00e9 au lait, sans sucre', stored)).toBe(true);
  });
});

describe('tokens', () => {
  it('are 256-bit base64url values, hashed with SHA-256', () => {
    const t = newToken();
    expect(t).toMatch(TOKEN_PATTERN);
    expect(newToken()).not.toBe(t);
    expect(hashToken(t)).toHaveLength(32);
  });
});

describe('the SMTP fake reads what nodemailer writes', () => {
  it('decodes base64 and quoted-printable parts and encoded-word subjects', () => {
    const raw = [
      'From: Lotproof <no-reply@lotproof.localhost>',
      'To: a@packer.example',
      'Subject: =?UTF-8?Q?You_are_invited_=E2=80=94_welcome?=',
      'MIME-Version: 1.0',
      'Content-Type: multipart/alternative; boundary="--b1"',
      '',
      '----b1',
      'Content-Type: text/plain; charset=utf-8',
      'Content-Transfer-Encoding: base64',
      '',
      Buffer.from('Open http://x.test/accept-invite?token=abc_DEF-123\nThanks').toString('base64'),
      '----b1',
      'Content-Type: text/html; charset=utf-8',
      'Content-Transfer-Encoding: quoted-printable',
      '',
      '<a href=3D"http://x.test/accept-invite?token=3Dabc">o=',
      'pen</a>',
      '----b1--',
      '',
    ].join('\r\n');
    const m = readMessage(raw);
    expect(m.subject).toBe('You are invited — welcome');
    expect(m.text).toBe('Open http://x.test/accept-invite?token=abc_DEF-123\nThanks');
    expect(m.html).toBe('<a href="http://x.test/accept-invite?token=abc">open</a>');
  });
});

describe('identity configuration', () => {
  it('has working defaults and turns the SMTP fake off in production and when SMTP_HOST is set', () => {
    const dev = loadConfig({ NODE_ENV: 'development' });
    expect(dev.smtp).toMatchObject({ host: '127.0.0.1', port: 4725, secure: false, fake: true });
    expect(dev.sessions).toEqual({ ttlHours: 12, idleMinutes: 30, invitationTtlHours: 168, passwordResetTtlMinutes: 60 });
    expect(loadConfig({ LOTPROOF_SESSION_IDLE_MINUTES: '15' }).sessions.idleMinutes).toBe(15);
    expect(() => loadConfig({ LOTPROOF_SESSION_IDLE_MINUTES: '0' })).toThrow(/LOTPROOF_SESSION_IDLE_MINUTES/);
    expect(dev.rateLimits.perKeyPerMinute).toBeGreaterThanOrEqual(1000);
    expect(loadConfig({ NODE_ENV: 'production' }).smtp.fake).toBe(false);
    expect(loadConfig({ NODE_ENV: 'production', LOTPROOF_SMTP_FAKE: 'true' }).smtp.fake).toBe(false);
    expect(loadConfig({ SMTP_HOST: 'mail.packer.example' }).smtp.fake).toBe(false);
    expect(() => loadConfig({ LOTPROOF_RATE_LIMIT_PER_KEY: '0' })).toThrow(/LOTPROOF_RATE_LIMIT_PER_KEY/);
  });
});
