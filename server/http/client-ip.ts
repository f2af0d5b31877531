// The client's address as every later step reads it (req.ip: rate limits, sign-in limits, the audit
// trail). Behind a trusted proxy Express takes it from X-Forwarded-For, where anything can be
// written: a value that is not an IP address is replaced by the connection's own address, so no
// client-written text reaches a limiter key or an address column.
import type { RequestHandler } from 'express';
import ipaddr from 'ipaddr.js';

export const clientIp: RequestHandler = (req, _res, next) => {
  const ip = req.ip;
  if (ip === undefined || !ipaddr.isValid(ip)) {
    Object.defineProperty(req, 'ip', { value: req.socket.remoteAddress ?? 'unknown', configurable: true, enumerable: true });
  }
  next();
};
