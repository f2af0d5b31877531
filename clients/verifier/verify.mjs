#!/usr/bin/env node
// Lotproof offline seal verifier. Checks exported verdicts against a JWK Set without trusting the
// Lotproof server: only node:crypto and the RFC 8785 canonicalisation below.
//
//   node verify.mjs --jwks jwks.json export.ndjson      (or a single verdict-<id>.json)
//
// For every sealed document (one per line) it checks that:
//   1. the document is exactly its own RFC 8785 canonical form (so any changed byte shows);
//   2. SHA-256 of the canonical JSON of `record` is `seal`;
//   3. `signature` is a valid Ed25519 signature of the 32 seal bytes by the key `kid` of the JWKS;
//   4. the record's chain fields hold together: position 1 has no previous seal, and where the
//      file holds consecutive positions, each record names the seal before it.
// Exit code 0 when every document passes, 1 when any fails, 2 on a usage or input error.
import { createHash, createPublicKey, verify } from 'node:crypto';
import { readFileSync } from 'node:fs';

/** RFC 8785 JSON Canonicalization Scheme. */
export function canonicalize(value) {
  if (value === null || typeof value === 'boolean') return JSON.stringify(value);
  if (typeof value === 'number') {
    if (!Number.isFinite(value)) throw new Error('non-finite number');
    return JSON.stringify(value); // ECMAScript number serialisation (RFC 8785 §3.2.2.3); -0 → 0
  }
  if (typeof value === 'string') {
    for (let i = 0; i < value.length; i++) {
      const c = value.charCodeAt(i);
      if (c >= 0xd800 && c <= 0xdbff) {
        const d = value.charCodeAt(i + 1);
        if (!(d >= 0xdc00 && d <= 0xdfff)) throw new Error('lone surrogate');
        i++;
      } else if (c >= 0xdc00 && c <= 0xdfff) throw new Error('lone surrogate');
    }
    return JSON.stringify(value);
  }
  if (Array.isArray(value)) return `[${value.map(canonicalize).join(',')}]`;
  if (typeof value === 'object') {
    // Property names sorted as arrays of UTF-16 code units (the default string sort).
    const keys = Object.keys(value).sort();
    return `{${keys.map((k) => `${canonicalize(k)}:${canonicalize(value[k])}`).join(',')}}`;
  }
  throw new Error(`unsupported value of type ${typeof value}`);
}

/** Strict base64url: decoding and re-encoding must give back the same text. */
function base64url(text) {
  if (typeof text !== 'string' || !/^[A-Za-z0-9_-]*$/.test(text)) return null;
  const bytes = Buffer.from(text, 'base64url');
  return bytes.toString('base64url') === text ? bytes : null;
}

export function loadJwks(text) {
  const jwks = JSON.parse(text);
  const keys = new Map();
  for (const k of jwks.keys ?? []) {
    if (k.kty !== 'OKP' || k.crv !== 'Ed25519' || typeof k.x !== 'string' || typeof k.kid !== 'string') continue;
    keys.set(k.kid, createPublicKey({ key: { kty: 'OKP', crv: 'Ed25519', x: k.x }, format: 'jwk' }));
  }
  return keys;
}

/** Checks one line; returns a list of problems (empty when it passes) and the parsed document. */
export function checkDocument(line, keys) {
  const problems = [];
  let doc;
  try {
    doc = JSON.parse(line);
  } catch (err) {
    return { problems: [`not valid JSON (${err.message})`], doc: null };
  }
  if (!doc || typeof doc !== 'object' || Array.isArray(doc)) return { problems: ['not a sealed document object'], doc: null };
  let canonical;
  try {
    canonical = canonicalize(doc);
  } catch (err) {
    return { problems: [`cannot be canonicalised (${err.message})`], doc: null };
  }
  if (canonical !== line) problems.push('the document is not in its canonical form: it was altered after export');
  if (doc.format !== 'lotproof.sealed-verdict/1') problems.push(`unknown format ${JSON.stringify(doc.format)}`);
  const rec = doc.record;
  if (!rec || typeof rec !== 'object') return { problems: [...problems, 'no record'], doc: null };
  const digest = createHash('sha256').update(canonicalize(rec), 'utf8').digest('hex');
  if (digest !== doc.seal) problems.push('the record does not hash to the seal');
  const key = keys.get(doc.kid);
  const sig = base64url(doc.signature);
  if (!key) problems.push(`the key ${JSON.stringify(doc.kid)} is not in the JWKS`);
  else if (!sig || typeof doc.seal !== 'string' || !/^[0-9a-f]{64}$/.test(doc.seal)) problems.push('malformed seal or signature');
  else if (!verify(null, Buffer.from(doc.seal, 'hex'), key, sig)) problems.push('the signature is not valid for this seal');
  if (rec.sequence === 1 && rec.previousSeal !== null) problems.push('position 1 must not name a previous seal');
  if (!Number.isInteger(rec.sequence) || rec.sequence < 1) problems.push('the record has no valid chain position');
  return { problems, doc };
}

export function checkExport(text, keys) {
  const lines = text.split('\n');
  if (lines[lines.length - 1] === '') lines.pop();
  const results = [];
  let prev = null;
  lines.forEach((line, i) => {
    const { problems, doc } = checkDocument(line, keys);
    if (doc && prev && doc.record.organisation?.id === prev.record.organisation?.id && doc.record.sequence === prev.record.sequence + 1 && doc.record.previousSeal !== prev.seal) {
      problems.push(`does not link to the seal on line ${i}`);
    }
    results.push({ line: i + 1, seal: doc?.seal ?? null, sequence: doc?.record?.sequence ?? null, problems });
    prev = doc;
  });
  return results;
}

function main(argv) {
  const j = argv.indexOf('--jwks');
  const jwksPath = j >= 0 ? argv[j + 1] : null;
  const files = argv.filter((a, i) => a !== '--jwks' && i !== j + 1);
  if (!jwksPath || files.length !== 1) {
    console.error('usage: node verify.mjs --jwks <jwks.json> <export.ndjson | verdict.json>');
    return 2;
  }
  let keys;
  let text;
  try {
    keys = loadJwks(readFileSync(jwksPath, 'utf8'));
    text = readFileSync(files[0], 'utf8');
  } catch (err) {
    console.error(`cannot read input: ${err.message}`);
    return 2;
  }
  if (text.length === 0) {
    console.error('the export is empty');
    return 1;
  }
  const results = checkExport(text, keys);
  let bad = 0;
  for (const r of results) {
    if (r.problems.length === 0) console.log(`ok    line ${r.line}  position ${r.sequence}  seal ${r.seal}`);
    else {
      bad++;
      console.log(`FAIL  line ${r.line}: ${r.problems.join('; ')}`);
    }
  }
  console.log(bad === 0 ? `all ${results.length} sealed verdict(s) verified` : `${bad} of ${results.length} failed`);
  return bad === 0 ? 0 : 1;
}

if (import.meta.url === `file://${process.argv[1]}`) process.exit(main(process.argv.slice(2)));
