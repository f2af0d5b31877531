// Issue 14, item 1: the process-wide policy for errors nothing caught (server/server.ts
// installProcessGuards), in a real child process: an unhandled rejection is logged (without
// secrets) and the process keeps serving; an uncaught exception stops it cleanly — the request
// under way is answered, no new connection is taken — and it exits with code 1.
import { spawn } from 'node:child_process';
import { request } from 'node:http';
import { describe, expect, it } from 'vitest';

const entry = `
import http from 'node:http';
import { installProcessGuards } from './server/server.ts';
import { createLogger } from './server/logger.ts';
const server = http.createServer((req, res) => {
  if (req.url === '/slow') setTimeout(() => res.end('slow done'), 1500);
  else if (req.url === '/reject') { Promise.reject(new Error('lost work for postgres://lotproof:hunter2@db/x token=abc123')); res.end('rejected'); }
  else if (req.url === '/throw') { setTimeout(() => { throw new Error('broken state'); }, 200); res.end('will throw'); }
  else res.end('ok');
});
server.listen(0, '127.0.0.1', () => console.log('port ' + server.address().port));
installProcessGuards(createLogger('info'), () => new Promise((resolve) => {
  server.close(() => { console.log('stopped cleanly'); resolve(); });
  server.closeIdleConnections();
}));
`;

function get(port: number, path: string): Promise<string> {
  return new Promise((resolve, reject) => {
    const req = request({ host: '127.0.0.1', port, path, agent: false }, (res) => {
      let body = '';
      res.on('data', (d) => (body += d));
      res.on('end', () => resolve(body));
    });
    req.on('error', reject);
    req.end();
  });
}

describe('process guards', () => {
  it('keep serving after an unhandled rejection, and stop cleanly with exit code 1 after an uncaught exception', async () => {
    const child = spawn(process.execPath, ['--import', 'tsx', '--input-type=module', '-e', entry], { cwd: process.cwd(), stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    child.stdout!.on('data', (d) => (out += d));
    child.stderr!.on('data', (d) => (out += d));
    const exited = new Promise<number | null>((r) => child.on('exit', (code) => r(code)));
    try {
      const deadline = Date.now() + 30_000;
      while (!/port \d+/.test(out)) {
        if (Date.now() > deadline || child.exitCode !== null) throw new Error(`no server:\n${out}`);
        await new Promise((r) => setTimeout(r, 50));
      }
      const port = Number(/port (\d+)/.exec(out)![1]);

      expect(await get(port, '/reject')).toBe('rejected');
      await new Promise((r) => setTimeout(r, 200));
      expect(await get(port, '/')).toBe('ok');
      expect(child.exitCode).toBeNull();
      expect(out).toMatch(/still serving/);
      expect(out).toMatch(/lost work/);
      expect(out).not.toMatch(/hunter2|abc123/);

      const slow = get(port, '/slow');
      await new Promise((r) => setTimeout(r, 100));
      expect(await get(port, '/throw')).toBe('will throw');
      await new Promise((r) => setTimeout(r, 500)); // the exception has been thrown; /slow is still under way
      await expect(get(port, '/')).rejects.toThrow(); // no new connections
      expect(await slow).toBe('slow done');
      expect(await exited).toBe(1);
      expect(out).toMatch(/stopped cleanly/);
      expect(out).toMatch(/broken state/);
    } finally {
      if (child.exitCode === null) child.kill('SIGKILL');
    }
  }, 45_000);
});
