// Issue 14, item 3: an unset NODE_ENV meant development, and development served /v1/dev/mailbox —
// every organisation's reset and invitation links — to anyone. Now: production unless development is
// asked for; and even then the mailbox only for a loopback client of a server that listens on loopback.
import { createServer, get, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { networkInterfaces } from 'node:os';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Express } from 'express';
import { loadConfig } from '../../server/config';
import { buildTestApp, testConfig, type TestApp } from '../support/app';

let dev: TestApp;

beforeAll(() => {
  dev = buildTestApp({ development: true, host: '127.0.0.1' });
});
afterAll(async () => {
  await dev.close();
});

/** Serves an app on `listenOn`, port chosen by the system. */
async function serve(app: Express, listenOn: string): Promise<{ port: number; close: () => Promise<void> }> {
  const server: Server = createServer(app);
  await new Promise<void>((resolve) => server.listen(0, listenOn, () => resolve()));
  return {
    port: (server.address() as AddressInfo).port,
    close: () => new Promise<void>((r) => {
      server.closeAllConnections();
      server.close(() => r());
    }),
  };
}

/** An address of this machine that is not loopback (a client connecting to it is not a loopback client). */
function outsideAddress(): string | null {
  for (const list of Object.values(networkInterfaces())) {
    for (const a of list ?? []) if (a.family === 'IPv4' && !a.internal) return a.address;
  }
  return null;
}

async function mailbox(url: string, headers: Record<string, string> = {}): Promise<{ status: number; body: { detail?: string; items?: unknown[] } }> {
  const res = await fetch(`${url}/v1/dev/mailbox`, { headers });
  return { status: res.status, body: (await res.json()) as { detail?: string } };
}

describe('development mode is asked for, never assumed', () => {
  it('with NODE_ENV unset, the server behaves as in production: no mailbox, no private webhook targets, no SMTP fake', () => {
    const env = { ...process.env };
    delete env.NODE_ENV;
    delete env.LOTPROOF_DEV;
    const config = loadConfig(env, []);
    expect(config.development).toBe(false);
    expect(config.smtp.fake).toBe(false);
    expect(config.verdicts.webhookAllowPrivateTargets).toBe(false);
  });

  it('answers a production server\'s mailbox with 404 that says how to turn development mode on, and says so at start', async () => {
    const env = { ...process.env };
    delete env.NODE_ENV;
    const prod = buildTestApp({ ...loadConfig(env, []), validateResponses: true, seedDemo: false }, dev.ctx.db);
    const s = await serve(prod.app, '127.0.0.1');
    try {
      const res = await mailbox(`http://127.0.0.1:${s.port}`);
      expect(res.status).toBe(404);
      expect(res.body.detail).toMatch(/npm run dev/);
      expect(res.body.detail).toMatch(/LOTPROOF_DEV=1/);
      expect(prod.logs.join('')).toMatch(/development mode is off.*npm run dev/i);
    } finally {
      await s.close();
    }
  });
});

describe('the development mailbox', () => {
  it('is served to a loopback client of a development server listening on loopback', async () => {
    const s = await serve(dev.app, '127.0.0.1');
    try {
      const res = await mailbox(`http://127.0.0.1:${s.port}`);
      expect(res.status).toBe(200);
      expect(Array.isArray(res.body.items)).toBe(true);
      expect((await mailbox(`http://localhost:${s.port}`)).status).toBe(200);
    } finally {
      await s.close();
    }
  });

  it('is not served to a client that is not on loopback', async () => {
    const outside = outsideAddress();
    if (!outside) return; // a machine with loopback only cannot make a non-loopback client
    const s = await serve(dev.app, '0.0.0.0');
    try {
      const res = await mailbox(`http://${outside}:${s.port}`);
      expect(res.status).toBe(404);
      expect(res.body.items).toBeUndefined();
    } finally {
      await s.close();
    }
  });

  it('is not served through a proxy for someone else, nor under a Host name that is not loopback (DNS rebinding)', async () => {
    const s = await serve(dev.app, '127.0.0.1');
    try {
      const url = `http://127.0.0.1:${s.port}`;
      expect((await mailbox(url, { 'X-Forwarded-For': '203.0.113.5' })).status).toBe(404);
      expect((await mailbox(url, { Forwarded: 'for=203.0.113.5' })).status).toBe(404);
      // fetch will not send a Host of its own choosing; node:http does
      const rebound = await new Promise<number>((resolve, reject) => {
        get({ host: '127.0.0.1', port: s.port, path: '/v1/dev/mailbox', headers: { Host: `rebound.example:${s.port}` } }, (res) => {
          res.resume();
          resolve(res.statusCode ?? 0);
        }).on('error', reject);
      });
      expect(rebound).toBe(404);
    } finally {
      await s.close();
    }
  });

  it('is off when the server listens beyond loopback, even for a loopback client', async () => {
    for (const host of ['0.0.0.0', '::', '192.0.2.10']) {
      const wide = buildTestApp({ development: true, host }, dev.ctx.db);
      const s = await serve(wide.app, '127.0.0.1');
      try {
        const res = await mailbox(`http://127.0.0.1:${s.port}`);
        expect(res.status, host).toBe(404);
        expect(res.body.detail).toMatch(/loopback/);
      } finally {
        await s.close();
      }
    }
  });

  it('keeps the test configuration in development mode (tests read mail through it)', () => {
    expect(testConfig().development).toBe(true);
  });
});
