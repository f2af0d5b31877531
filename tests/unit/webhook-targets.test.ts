// Webhook targets: IPv6 forms that carry a private or local address, or name no global unicast
// host, are not public (issue 14, item 16). IPv4-compatible addresses (RFC 4291 §2.5.5.1,
// deprecated: `::7f00:1` is 127.0.0.1), site-local (RFC 3879, deprecated), the local-use NAT64
// prefix (RFC 8215) and the IPv6 documentation prefix (RFC 9637); and whatever lies outside the
// global unicast block 2000::/3 (RFC 4291 §2.4).
import { describe, expect, it } from 'vitest';
import { postWebhook, RefusedTarget } from '../../server/jobs/webhook-post';
import { isPrivateAddress, isPrivateHost } from '../../server/webhooks/endpoints';

const NOT_PUBLIC = [
  '::7f00:1', '::a00:1', '::c0a8:101', '::808:808', '[::7f00:1]',
  'fec0::1', 'feff::1', 'fed0:1234::5',
  '64:ff9b:1::7f00:1', '64:ff9b:1:ffff::1',
  '3fff::1', '3fff:fff:ffff::1',
  '4000::1', '1::1', '8000::1', 'e000::1', '100:1::1',
];

describe('IPv6 targets that must not pass as public', () => {
  it.each(NOT_PUBLIC)('%s is not a public address', (ip) => {
    expect(isPrivateAddress(ip)).toBe(true);
    expect(isPrivateHost(ip)).toBe(true);
  });

  it('still lets plain global unicast through', () => {
    for (const ip of ['2a00:1450:4001:82b::200e', '2606:4700:4700::1111', '2400:cb00::1', '3ffe:1::1']) expect(isPrivateAddress(ip), ip).toBe(false);
  });

  it('refuses to post to them, before any connection', async () => {
    for (const ip of ['::7f00:1', 'fec0::1', '64:ff9b:1::1']) {
      await expect(postWebhook(`https://[${ip}]:9/hook`, {}, '{}', { timeoutMs: 500, allowPrivate: false }), ip).rejects.toBeInstanceOf(RefusedTarget);
    }
  });
});
