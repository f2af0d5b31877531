// Webhook targets are checked as they are connected to, not only when saved (DNS rebinding).
// The address ranges are those of RFC 1918 (private), RFC 6598 (shared), RFC 3927 (link-local),
// RFC 1122 (loopback, "this network"), RFC 2544 (benchmarking), RFC 5737 and RFC 3849
// (documentation), RFC 5771 (multicast), RFC 4193 / 4291 (IPv6 unique-local, link-local, loopback,
// multicast, IPv4-mapped) and RFC 6052 (NAT64).
import { createServer } from 'node:http';
import type { AddressInfo } from 'node:net';
import { describe, expect, it } from 'vitest';
import { postWebhook, publicOnlyLookup, RefusedTarget } from '../../server/jobs/webhook-post';
import { isPrivateAddress } from '../../server/webhooks/endpoints';

describe('isPrivateAddress', () => {
  it('knows the private, shared, loopback, link-local, multicast and reserved ranges', () => {
    for (const ip of [
      '10.1.2.3', '127.0.0.1', '0.0.0.0', '169.254.169.254', '172.16.0.1', '172.31.255.255', '192.168.1.1', '100.64.0.1', '198.18.0.1', '198.19.255.255',
      '192.0.2.10', '198.51.100.7', '203.0.113.99', '224.0.0.1', '240.0.0.1', '255.255.255.255',
      '::1', '::', 'fd00::1', 'fe80::1', '::ffff:127.0.0.1', '::ffff:8.8.8.8', '64:ff9b::7f00:1', 'ff02::1', '2001:db8::1', '[2001:db8::1]',
    ]) {
      expect(isPrivateAddress(ip), ip).toBe(true);
    }
    for (const ip of ['8.8.8.8', '172.15.0.1', '172.32.0.1', '100.63.255.255', '100.128.0.1', '193.0.14.129', '198.20.0.1', '2a00:1450::1', '2606:4700::1111']) {
      expect(isPrivateAddress(ip), ip).toBe(false);
    }
  });
});

describe('publicOnlyLookup', () => {
  const call = (addresses: { address: string; family: number }[]) =>
    new Promise<{ err: Error | null; address: string }>((resolve) => {
      publicOnlyLookup((_h, cb) => cb(null, addresses))('receiver.example', {}, (err, address) => resolve({ err, address: String(address) }));
    });

  it('answers with a public address', async () => {
    expect(await call([{ address: '93.184.215.14', family: 4 }])).toEqual({ err: null, address: '93.184.215.14' });
  });

  it('refuses a name with any private address among its answers (a rebinding name)', async () => {
    const r = await call([{ address: '93.184.215.14', family: 4 }, { address: '127.0.0.1', family: 4 }]);
    expect(r.err).toBeInstanceOf(RefusedTarget);
    expect(r.err!.message).toMatch(/127\.0\.0\.1/);
  });
});

describe('postWebhook', () => {
  it('never connects to a private receiver unless private targets are allowed', async () => {
    let hits = 0;
    const server = createServer((_req, res) => {
      hits++;
      res.end('ok');
    });
    await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
    const port = (server.address() as AddressInfo).port;
    try {
      const body = '{"type":"webhook.test"}';
      // a public-looking name that resolves to loopback: refused before any connection
      const rebinding = postWebhook(`https://receiver.example:${port}/hook`, {}, body, {
        timeoutMs: 2000, allowPrivate: false, resolve: (_h, cb) => cb(null, [{ address: '127.0.0.1', family: 4 }]),
      });
      await expect(rebinding).rejects.toBeInstanceOf(RefusedTarget);
      await expect(postWebhook(`https://127.0.0.1:${port}/hook`, {}, body, { timeoutMs: 2000, allowPrivate: false })).rejects.toBeInstanceOf(RefusedTarget);
      await expect(postWebhook(`http://receiver.example:${port}/hook`, {}, body, { timeoutMs: 2000, allowPrivate: false })).rejects.toBeInstanceOf(RefusedTarget);
      expect(hits).toBe(0);
      // allowed (development and tests): delivered
      expect(await postWebhook(`http://127.0.0.1:${port}/hook`, { 'content-type': 'application/json' }, body, { timeoutMs: 2000, allowPrivate: true })).toEqual({ status: 200 });
      expect(hits).toBe(1);
    } finally {
      server.close();
    }
  });
});
