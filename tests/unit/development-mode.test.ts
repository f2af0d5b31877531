// Issue 14, item 3: development mode (the captured mailbox, the local SMTP fake, webhooks to private
// addresses) is on only when asked for: NODE_ENV=development (or test), LOTPROOF_DEV=1, or `--dev`
// (`npm run dev`). An unset NODE_ENV is production.
import { describe, expect, it } from 'vitest';
import { ConfigError, loadConfig } from '../../server/config';

describe('development mode', () => {
  it('is off when nothing asks for it', () => {
    const c = loadConfig({}, []);
    expect(c.development).toBe(false);
    expect(c.smtp.fake).toBe(false);
    expect(c.verdicts.webhookAllowPrivateTargets).toBe(false);
    expect(loadConfig({ NODE_ENV: 'production' }, []).development).toBe(false);
    expect(loadConfig({ NODE_ENV: 'staging' }, []).development).toBe(false);
  });

  it('is on with NODE_ENV=development or test, LOTPROOF_DEV=1, or --dev', () => {
    for (const c of [
      loadConfig({ NODE_ENV: 'development' }, []),
      loadConfig({ NODE_ENV: 'test' }, []),
      loadConfig({ LOTPROOF_DEV: '1' }, []),
      loadConfig({ LOTPROOF_DEV: 'true' }, []),
      loadConfig({}, ['--dev']),
    ]) {
      expect(c.development).toBe(true);
      expect(c.smtp.fake).toBe(true);
      expect(c.verdicts.webhookAllowPrivateTargets).toBe(true);
    }
  });

  it('lets LOTPROOF_DEV=0 turn it off, and refuses to be both production and development', () => {
    expect(loadConfig({ NODE_ENV: 'development', LOTPROOF_DEV: '0' }, []).development).toBe(false);
    expect(() => loadConfig({ NODE_ENV: 'production', LOTPROOF_DEV: '1' }, [])).toThrow(ConfigError);
    expect(() => loadConfig({ NODE_ENV: 'production' }, ['--dev'])).toThrow(/NODE_ENV=production/);
    expect(() => loadConfig({ LOTPROOF_DEV: 'maybe' }, [])).toThrow(/LOTPROOF_DEV/);
  });

  it('reads --dev from the command line by default', () => {
    // vitest's own command line has no --dev
    expect(loadConfig({}).development).toBe(false);
  });
});
