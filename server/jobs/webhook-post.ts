// One webhook POST, to an address that is checked when it is connected to. A URL is checked when
// it is saved (https, public host), but a public name can later resolve to a private address
// (DNS rebinding, or a record changed on purpose). So unless private targets are allowed, the
// name is resolved here, every address it has must be public, and the connection goes to the
// address that was checked: nothing resolves the name again between the check and the connect.
// node:http(s) rather than fetch, because only they take a `lookup` for one request.
import { lookup as dnsLookup, type LookupAddress } from 'node:dns';
import http from 'node:http';
import https from 'node:https';
import { isIP, type LookupFunction } from 'node:net';
import { isPrivateAddress } from '../webhooks/endpoints';

export class RefusedTarget extends Error {}

type Resolver = (hostname: string, cb: (err: NodeJS.ErrnoException | null, addresses: LookupAddress[]) => void) => void;

const systemResolver: Resolver = (hostname, cb) => dnsLookup(hostname, { all: true, verbatim: true }, cb);

/** A `lookup` for http.request that answers only with public addresses (all must be public). */
export function publicOnlyLookup(resolve: Resolver = systemResolver): LookupFunction {
  return (hostname, options, cb) => {
    resolve(hostname, (err, addresses) => {
      if (err) return cb(err, '', 4);
      const bad = addresses.find((a) => isPrivateAddress(a.address));
      if (addresses.length === 0 || bad) {
        return cb(new RefusedTarget(`${hostname} resolves to ${bad ? `the private address ${bad.address}` : 'no address'}; webhooks go to public hosts only`), '', 4);
      }
      const family = (options as { family?: number }).family;
      const chosen = addresses.find((a) => !family || a.family === family) ?? addresses[0]!;
      if ((options as { all?: boolean }).all) return (cb as unknown as (e: null, a: LookupAddress[]) => void)(null, [chosen]);
      cb(null, chosen.address, chosen.family);
    });
  };
}

// Keep-alive agents: a receiver that takes many deliveries gets them over a few reused connections
// instead of a new connection (and TLS handshake) each. A pooled connection was made to an address
// checked when it was connected, so reusing it checks nothing less. Checked and unchecked
// (private targets allowed) connections are kept apart.
// No cap on sockets per host here: the outbox caps deliveries per endpoint and organisation, and a cap
// per host would let one tenant's slow endpoint hold up another's at the same host.
const agentOptions = { keepAlive: true, maxFreeSockets: 16, timeout: 4_000 };
const agents = {
  checked: { http: new http.Agent(agentOptions), https: new https.Agent(agentOptions) },
  unchecked: { http: new http.Agent(agentOptions), https: new https.Agent(agentOptions) },
};

export interface PostResult {
  status: number;
}

/** POSTs body to url with headers; no redirects are followed; rejects on timeout or a refused target. */
export function postWebhook(url: string, headers: Record<string, string>, body: string, opts: { timeoutMs: number; allowPrivate: boolean; resolve?: Resolver }): Promise<PostResult> {
  const u = new URL(url);
  const host = u.hostname.replace(/^\[|\]$/g, '');
  if (!opts.allowPrivate) {
    if (u.protocol !== 'https:') return Promise.reject(new RefusedTarget('webhooks go to https:// URLs only'));
    if (isIP(host) && isPrivateAddress(host)) return Promise.reject(new RefusedTarget(`${host} is a private address; webhooks go to public hosts only`));
  }
  const client = u.protocol === 'https:' ? https : http;
  return new Promise((resolve, reject) => {
    const req = client.request(
      u,
      {
        method: 'POST',
        headers: { ...headers, 'content-length': String(Buffer.byteLength(body)) },
        ...(opts.allowPrivate ? {} : { lookup: publicOnlyLookup(opts.resolve) }),
        // a test's own resolver never shares connections with real ones
        agent: opts.resolve ? false : agents[opts.allowPrivate ? 'unchecked' : 'checked'][u.protocol === 'https:' ? 'https' : 'http'],
      },
      (res) => {
        res.resume();
        res.on('end', () => resolve({ status: res.statusCode ?? 0 }));
        res.on('error', reject);
      },
    );
    // The whole exchange, from connecting to the end of the answer, within the timeout.
    const timer = setTimeout(() => req.destroy(Object.assign(new Error(`no answer within ${opts.timeoutMs} ms`), { name: 'TimeoutError' })), opts.timeoutMs);
    req.on('close', () => clearTimeout(timer));
    req.on('error', reject);
    req.end(body);
  });
}
