// Who may read the development mailbox: it holds every organisation's invitation and reset links, so
// it is served only in development mode (asked for explicitly, see config.ts), only by a server that
// listens on loopback, and only to a loopback client that talks to it directly: the connection comes
// from loopback, no proxy header says it is relayed for someone else, and the Host is a loopback name
// (a page whose own name was re-pointed at 127.0.0.1 — DNS rebinding — sends its own name).
import type { Request } from 'express';
import ipaddr from 'ipaddr.js';
import { DEVELOPMENT_MODE_HOW, type Config } from '../config';

function loopbackAddress(address: string | undefined): boolean {
  if (!address || !ipaddr.isValid(address)) return false;
  return ipaddr.process(address).range() === 'loopback';
}

/** A name or address that can only mean this machine's loopback interface. */
function loopbackName(name: string): boolean {
  const host = name.toLowerCase().replace(/^\[(.*)\]$/, '$1');
  return host === 'localhost' || host.endsWith('.localhost') || loopbackAddress(host);
}

/** The Host header without its port ("[::1]:4780" → "[::1]", "127.0.0.1:4780" → "127.0.0.1"). */
function hostOf(header: string | undefined): string {
  if (!header) return '';
  const bracketed = /^(\[[^\]]*\])(?::\d+)?$/.exec(header);
  if (bracketed) return bracketed[1]!;
  return header.replace(/:\d+$/, '');
}

/** True when the server's HOST is loopback only (127.0.0.0/8, ::1, localhost). */
export function listensOnLoopbackOnly(config: Pick<Config, 'host'>): boolean {
  return loopbackName(config.host);
}

/** Why the mailbox is not served to this request, or null when it is. */
export function mailboxRefusal(config: Pick<Config, 'development' | 'host'>, req: Request): string | null {
  if (!config.development) {
    return `This server runs in production mode, which has no development mailbox. For a local trial with captured e-mail, ${DEVELOPMENT_MODE_HOW}.`;
  }
  if (!listensOnLoopbackOnly(config)) {
    return `The development mailbox is served only by a server that listens on loopback; this one listens on ${config.host}.`;
  }
  const relayed = req.headers['x-forwarded-for'] !== undefined || req.headers.forwarded !== undefined || req.headers['x-real-ip'] !== undefined;
  if (relayed || !loopbackAddress(req.socket.remoteAddress) || !loopbackAddress(req.ip) || !loopbackName(hostOf(req.headers.host))) {
    return 'The development mailbox is served only to a browser or client on this machine (loopback), by a loopback address or localhost.';
  }
  return null;
}
