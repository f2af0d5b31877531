// LOTPROOF_TRUST_PROXY: parsed at start into a value Express's `trust proxy` accepts, and refused
// with a message naming the variable when it is not one.
import express from 'express';
import { describe, expect, it } from 'vitest';
import { ConfigError, loadConfig, parseTrustProxy } from '../../server/config';

/** Express's compiled trust function for a setting: does it trust `addr` as hop `i`? */
function trusts(setting: unknown, addr: string, i = 0): boolean {
  const app = express();
  app.set('trust proxy', setting);
  return (app.get('trust proxy fn') as (a: string, i: number) => boolean)(addr, i);
}

describe('LOTPROOF_TRUST_PROXY', () => {
  it('defaults to loopback', () => {
    expect(parseTrustProxy(undefined)).toEqual(['loopback']);
    expect(parseTrustProxy('  ')).toEqual(['loopback']);
    expect(loadConfig({ NODE_ENV: 'test' }).trustProxy).toEqual(['loopback']);
    expect(trusts(['loopback'], '127.0.0.1')).toBe(true);
    expect(trusts(['loopback'], '::1')).toBe(true);
    expect(trusts(['loopback'], '10.1.2.3')).toBe(false);
  });

  it('takes true and false', () => {
    expect(parseTrustProxy('true')).toBe(true);
    expect(parseTrustProxy('FALSE')).toBe(false);
    expect(trusts(parseTrustProxy('false'), '127.0.0.1')).toBe(false);
  });

  it('takes a number of hops', () => {
    expect(parseTrustProxy('2')).toBe(2);
    expect(parseTrustProxy('0')).toBe(0);
    expect(trusts(2, '203.0.113.9', 1)).toBe(true);
    expect(trusts(2, '203.0.113.9', 2)).toBe(false);
  });

  it('takes a comma-separated list of addresses, subnets and preset names', () => {
    const list = parseTrustProxy('loopback, 10.0.0.0/8 ,192.168.1.7,fd00::/8,172.16.0.0/255.240.0.0,uniquelocal,::1');
    expect(list).toEqual(['loopback', '10.0.0.0/8', '192.168.1.7', 'fd00::/8', '172.16.0.0/255.240.0.0', 'uniquelocal', '::1']);
    expect(trusts(list, '10.200.3.4')).toBe(true);
    expect(trusts(list, '172.31.255.1')).toBe(true);
    expect(trusts(list, '192.168.1.8')).toBe(true); // uniquelocal covers 192.168.0.0/16
    expect(trusts(['192.168.1.7'], '192.168.1.8')).toBe(false);
    expect(trusts(list, '8.8.8.8')).toBe(false);
  });

  it('refuses anything else at start, naming the variable and the bad entries', () => {
    for (const bad of ['yes', '-1', '101', '1.5', 'loopback,', '10.0.0.0/33', '::/129', '10.0.0.0/255.0.255.0', 'localhost', '300.1.1.1', 'loopback;10.0.0.1', '10.0.0.0/']) {
      expect(() => parseTrustProxy(bad), bad).toThrow(ConfigError);
      expect(() => parseTrustProxy(bad), bad).toThrow(/LOTPROOF_TRUST_PROXY/);
    }
    expect(() => loadConfig({ NODE_ENV: 'test', LOTPROOF_TRUST_PROXY: 'loopback, proxy.internal' })).toThrow(/"proxy\.internal"/);
  });
});
