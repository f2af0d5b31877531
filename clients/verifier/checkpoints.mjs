// Checkpoints: their signature and key window, and the auditor's folder of checkpoints seen before,
// against which every new one must be consistent (RFC 9162 §2.1.4) so a rewritten history shows.
import { existsSync, mkdirSync, readdirSync, readFileSync, renameSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { canonicalize, isHash, isObject } from './canonical.mjs';
import { checkSignature, instant } from './keys.mjs';
import { verifyConsistency } from './merkle.mjs';

export const CHECKPOINT_FORMAT = 'lotproof.checkpoint/1';

/** Problems with a checkpoint object (shape, key window at issuedAt, signature); empty when valid. */
export function checkCheckpoint(cp, keys) {
  if (!isObject(cp)) return ['the checkpoint is not a JSON object'];
  const problems = [];
  if (cp.format !== CHECKPOINT_FORMAT) problems.push(`the checkpoint's format ${JSON.stringify(cp.format)} is not ${CHECKPOINT_FORMAT}`);
  if (typeof cp.organisationId !== 'string' || !/^[A-Za-z0-9_-]{1,100}$/.test(cp.organisationId)) problems.push('the checkpoint has no valid organisationId');
  if (!Number.isSafeInteger(cp.treeSize) || cp.treeSize < 1) problems.push('the checkpoint has no valid treeSize (an integer ≥ 1)');
  if (!isHash(cp.rootHash)) problems.push('the checkpoint rootHash is not 64 lower-case hex digits');
  if (instant(cp.issuedAt) === null || new Date(instant(cp.issuedAt)).toISOString() !== cp.issuedAt) problems.push('the checkpoint issuedAt is not a UTC ISO 8601 time in milliseconds');
  if (problems.length > 0) return problems;
  const { signature, ...signed } = cp;
  const problem = checkSignature(keys, cp.kid, cp.issuedAt, Buffer.from(canonicalize(signed), 'utf8'), signature);
  if (problem) problems.push(`the checkpoint signature: ${problem}`);
  return problems;
}

export const describe = (cp) => `size ${cp.treeSize} root ${cp.rootHash} issued ${cp.issuedAt}`;

/**
 * Reads a consistency proof file: a list of {fromSize,toSize,hashes}, or one such object; a reply of
 * GET /v1/ledger/proofs/consistency ({from, to, proof}) counts as its `proof`.
 */
export function loadProofs(text) {
  const value = JSON.parse(text);
  const list = Array.isArray(value) ? value : isObject(value) && Array.isArray(value.proofs) ? value.proofs : [value];
  return list.map((item, i) => {
    const p = isObject(item) && isObject(item.proof) ? item.proof : item;
    if (!isObject(p) || !Number.isSafeInteger(p.fromSize) || !Number.isSafeInteger(p.toSize) || !Array.isArray(p.hashes) || !p.hashes.every(isHash)) {
      throw new Error(`proof ${i + 1} is not {fromSize, toSize, hashes: [64 hex digits…]}`);
    }
    return { fromSize: p.fromSize, toSize: p.toSize, hashes: p.hashes.map((h) => Buffer.from(h, 'hex')) };
  });
}

/** One folder per organisation, one JSON file per checkpoint seen: <folder>/<organisationId>/size-<n>-<root>.json */
export class CheckpointFolder {
  constructor(folder) {
    this.folder = folder;
  }

  fileName(cp) {
    return `size-${String(cp.treeSize).padStart(16, '0')}-${cp.rootHash}.json`;
  }

  /** The kept checkpoints of one organisation, each re-verified with the pinned keys; problems name the file. */
  load(organisationId, keys) {
    const dir = join(this.folder, organisationId);
    const kept = [];
    const problems = [];
    if (!existsSync(dir)) return { kept, problems };
    for (const name of readdirSync(dir).filter((n) => n.endsWith('.json')).sort()) {
      let cp;
      try {
        cp = JSON.parse(readFileSync(join(dir, name), 'utf8'));
      } catch (err) {
        problems.push(`kept checkpoint ${name} cannot be read: ${err.message}`);
        continue;
      }
      const bad = checkCheckpoint(cp, keys);
      if (cp?.organisationId !== organisationId) bad.push('it belongs to another organisation than its folder');
      if (bad.length > 0) problems.push(`kept checkpoint ${name} no longer verifies: ${bad.join('; ')}`);
      else kept.push({ cp, file: name });
    }
    return { kept, problems };
  }

  /** Keeps a checkpoint (written whole, then renamed, so a crash leaves no half file); false when already kept. */
  save(cp) {
    const dir = join(this.folder, cp.organisationId);
    mkdirSync(dir, { recursive: true });
    const file = join(dir, this.fileName(cp));
    if (existsSync(file)) return false;
    writeFileSync(`${file}.tmp`, JSON.stringify(cp, null, 2) + '\n');
    renameSync(`${file}.tmp`, file);
    return true;
  }
}

/**
 * Checks a new checkpoint against every kept one of its organisation. `rootAt(size)` gives a root
 * recomputed from the export's own leaves (or null); `proofs` are consistency proofs given by the
 * user. Each kept checkpoint is checked directly where a root or a proof reaches it; the nearest
 * kept checkpoint below and above the new size must be, the others may be covered through them
 * (kept checkpoints were all checked against each other when they were kept, and being a prefix is
 * transitive). Returns { problems, notes }.
 */
export function checkAgainstKept(cp, kept, { rootAt = () => null, proofs = [] } = {}) {
  const problems = [];
  const notes = [];
  const issued = instant(cp.issuedAt);
  const below = kept.filter((k) => k.cp.treeSize <= cp.treeSize).sort((a, b) => b.cp.treeSize - a.cp.treeSize)[0];
  const above = kept.filter((k) => k.cp.treeSize > cp.treeSize).sort((a, b) => a.cp.treeSize - b.cp.treeSize)[0];
  for (const k of kept) {
    const old = k.cp;
    const name = `kept checkpoint ${describe(old)}`;
    if (old.treeSize === cp.treeSize) {
      if (old.rootHash !== cp.rootHash) problems.push(`INCONSISTENT with ${name}: two different roots for one tree size — the history was rewritten`);
      else notes.push(`same tree as ${name}`);
      continue;
    }
    const oldIssued = instant(old.issuedAt);
    if ((issued > oldIssued && cp.treeSize < old.treeSize) || (issued < oldIssued && cp.treeSize > old.treeSize)) {
      problems.push(`INCONSISTENT with ${name}: a checkpoint issued later names a smaller tree — the ledger was cut back`);
      continue;
    }
    const [small, big] = old.treeSize < cp.treeSize ? [old, cp] : [cp, old];
    const recomputed = rootAt(old.treeSize);
    if (recomputed) {
      if (recomputed.equals(Buffer.from(old.rootHash, 'hex'))) notes.push(`consistent with ${name}: its root recomputed from the export's leaves`);
      else problems.push(`INCONSISTENT with ${name}: the export's first ${old.treeSize} leaves give root ${recomputed.toString('hex')} — the history was rewritten`);
      continue;
    }
    const proof = proofs.find((p) => p.fromSize === small.treeSize && p.toSize === big.treeSize);
    if (proof) {
      const ok = verifyConsistency(small.treeSize, big.treeSize, proof.hashes, Buffer.from(small.rootHash, 'hex'), Buffer.from(big.rootHash, 'hex'));
      if (ok) notes.push(`consistent with ${name}: consistency proof ${small.treeSize} → ${big.treeSize} verified`);
      else problems.push(`INCONSISTENT with ${name}: the consistency proof ${small.treeSize} → ${big.treeSize} does not verify — the history was rewritten, or the proof is wrong`);
      continue;
    }
    if (k === below || k === above) {
      problems.push(`cannot check consistency with ${name}: give the consistency proof from size ${small.treeSize} to size ${big.treeSize} with --consistency`);
    } else {
      notes.push(`consistent with ${name} through the nearest kept checkpoint(s), which were checked directly`);
    }
  }
  return { problems, notes };
}
