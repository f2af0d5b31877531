// Seal checks for the audit lookup and the verdict page. The server supplies the documents; the
// three checks themselves run in this browser (lib/seal.ts), so they do not rest on its word.
import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api, call } from '../api/client';
import { ApiError } from '../api/problem';
import { checkChainLink, checkHash, checkSignature, type CheckResult, type Jwk } from '../lib/seal';
import type { components } from '../../../shared/api/schema';

type SealedDocument = components['schemas']['SealedDocument'];
type SealLookup = components['schemas']['SealLookup'];

export interface SealReport {
  seal: string;
  document: SealedDocument;
  /** The server's copy under this seal (null when it holds none). */
  lookup: SealLookup | null;
  hash: CheckResult & { computed: string | null };
  signature: CheckResult;
  chain: CheckResult;
  /** For a document brought by the auditor: does it match the server's copy byte for byte? */
  matchesServerCopy: boolean | null;
}

const SEAL = /^[0-9a-fA-F]{64}$/;

export function isSeal(text: string): boolean {
  return SEAL.test(text.trim());
}

/** What the lookup is asked for: a full seal, or a short one (its first 8–63 hex digits, and maybe its last ones, as lists show it). */
export interface SealQuery {
  /** The full seal, or the digits it starts with (lower case). */
  prefix: string;
  /** The digits it ends with, when a list's short form ("3f9c0a12bd…e41a07") was pasted. */
  suffix: string | null;
}

const SHORT = /^([0-9a-f]{8,63})(?:(?:…|\.\.\.)([0-9a-f]{1,56}))?$/;

/** A seal or short seal from typed or pasted text, or null when it is neither. */
export function sealQuery(text: string): SealQuery | null {
  const t = text.trim().toLowerCase();
  if (SEAL.test(t)) return { prefix: t, suffix: null };
  const m = SHORT.exec(t);
  return m ? { prefix: m[1]!, suffix: m[2] ?? null } : null;
}

/** A sealed document from pasted or dropped text, or a sentence saying why it is not one. */
export function parseDocument(text: string): SealedDocument | string {
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch {
    return 'This is neither a seal (64 hexadecimal characters) nor a sealed document (JSON).';
  }
  const d = value as Partial<SealedDocument>;
  if (!d || typeof d !== 'object' || typeof d.seal !== 'string' || typeof d.signature !== 'string' || typeof d.kid !== 'string' || typeof d.record !== 'object' || d.record === null) {
    return 'This JSON is not a sealed verdict document: it needs record, seal, signature and kid.';
  }
  return d as SealedDocument;
}

export const useSealsStore = defineStore('seals', () => {
  const jwks = ref<{ keys: Jwk[] } | null>(null);

  async function publicKeys(): Promise<{ keys: Jwk[] }> {
    if (!jwks.value) jwks.value = await call(api.GET('/.well-known/jwks.json'));
    return jwks.value;
  }

  async function lookup(seal: string): Promise<SealLookup | null> {
    try {
      return await call(api.GET('/v1/seals/{seal}', { params: { path: { seal: seal.toLowerCase() } } }));
    } catch (err) {
      if (err instanceof ApiError && err.status === 404) return null;
      throw err;
    }
  }

  /** Checks a document: from the server (by seal) or brought by the auditor. */
  async function check(document: SealedDocument, serverCopy?: SealLookup | null): Promise<SealReport> {
    const keys = await publicKeys();
    const lookedUp = serverCopy !== undefined ? serverCopy : await lookup(document.seal);
    const hash = await checkHash(document.record, document.seal);
    const signature = await checkSignature(document.seal, document.signature, document.kid, keys, (document.record as { recordedAt?: unknown }).recordedAt);
    const record = document.record as { previousSeal?: unknown };
    const previousSeal = typeof record.previousSeal === 'string' ? record.previousSeal : null;
    let previous: { record: unknown; seal: string } | null = null;
    if (previousSeal) {
      const prev = await lookup(previousSeal);
      previous = prev ? { record: prev.document.record, seal: prev.document.seal } : null;
    } else if (lookedUp?.previous) {
      previous = { record: null, seal: lookedUp.previous.seal };
    }
    let chain = await checkChainLink(previousSeal, previous);
    if (chain.state === 'pass' && lookedUp && previousSeal && lookedUp.previous?.seal !== previousSeal) {
      chain = { state: 'fail', detail: 'The ledger’s neighbour before this verdict is not the one the record names.' };
    }
    const matchesServerCopy = lookedUp ? JSON.stringify(lookedUp.document.record) === JSON.stringify(document.record) && lookedUp.document.signature === document.signature : null;
    return { seal: document.seal, document, lookup: lookedUp, hash, signature, chain, matchesServerCopy };
  }

  /** Checks the verdict a seal or short seal names (a short seal: among this organisation's verdicts; several sharing it is a 409). */
  async function checkSeal(seal: string): Promise<SealReport | null> {
    const q = sealQuery(seal) ?? { prefix: seal.trim(), suffix: null };
    const found = await lookup(q.prefix);
    if (!found || (q.suffix && !found.document.seal.endsWith(q.suffix))) return null;
    return check(found.document, found);
  }

  return { publicKeys, lookup, check, checkSeal };
});
