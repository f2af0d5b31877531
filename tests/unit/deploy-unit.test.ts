// The shipped systemd unit (deploy/systemd/) supervises the server: systemd itself finds nothing to
// warn about in it, it starts the repository's own entry point, it restarts on every exit, and every
// variable of its example environment is one the README documents.
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

const root = fileURLToPath(new URL('../../', import.meta.url));
const unitPath = `${root}deploy/systemd/lotproof.service`;
const unit = readFileSync(unitPath, 'utf8');
const setting = (key: string) => [...unit.matchAll(new RegExp(`^${key}=(.*)$`, 'gm'))].map((m) => m[1]!.trim());

describe('systemd unit', () => {
  it('passes systemd-analyze verify without a warning', () => {
    // systemd-analyze comes with Debian's systemd package, on every machine of this project's kind
    const out = execFileSync('systemd-analyze', ['verify', unitPath], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'] });
    expect(out.trim()).toBe('');
  });

  it('starts the entry point of this repository and restarts it whatever made it exit', () => {
    const [exec] = setting('ExecStart');
    const script = exec!.split(/\s+/).find((w) => w.endsWith('.ts'))!;
    expect(existsSync(`${root}${script}`)).toBe(true);
    expect(setting('Restart')).toEqual(['always']);
    expect(setting('Environment')).toContain('NODE_ENV=production');
  });

  it('uses only variables the README documents', () => {
    const readme = readFileSync(`${root}README.md`, 'utf8');
    const example = readFileSync(`${root}deploy/systemd/lotproof.env.example`, 'utf8');
    const names = [...example.matchAll(/^([A-Z_]+)=/gm)].map((m) => m[1]!);
    expect(names.length).toBeGreaterThan(3);
    for (const name of names) expect(readme, name).toContain(`\`${name}\``);
  });
});
