// Verifies an NDJSON export v2 (FORMAT.md) line by line as it streams: each sealed document, its
// inclusion proof in the header's checkpoint, the order and completeness of the positions, the
// links by previous seal, and the root recomputed from the leaves.
import { createHash } from 'node:crypto';
import { createReadStream } from 'node:fs';
import { createInterface } from 'node:readline';
import { canonicalize, isHash, isObject } from './canonical.mjs';
import { checkAgainstKept, checkCheckpoint, describe } from './checkpoints.mjs';
import { checkSignature } from './keys.mjs';
import { CompactRange, leafHash, verifyInclusion } from './merkle.mjs';

export const EXPORT_FORMAT = 'lotproof.export/2';
export const DOCUMENT_FORMAT = 'lotproof.sealed-verdict/1';
/** A withdrawal of a verdict (FORMAT.md, "Sealed withdrawal document"): a record of the same chain. */
export const WITHDRAWAL_FORMAT = 'lotproof.sealed-withdrawal/1';
export const WITHDRAWAL_RECORD_FORMAT = 'lotproof.withdrawal-record/1';
const DOCUMENT_FORMATS = new Set([DOCUMENT_FORMAT, WITHDRAWAL_FORMAT]);
const DOCUMENT_MEMBERS = new Set(['format', 'kid', 'record', 'seal', 'signature', 'inclusion']);
const HEADER_MEMBERS = new Set(['checkpoint', 'complete', 'filter', 'format', 'from', 'organisationId', 'to']);
const range = (a, b) => (a === b ? `position ${a}` : `positions ${a}–${b}`);

/** Parses a line that must be exactly its own RFC 8785 form. */
function parseCanonical(line) {
  let value;
  try {
    value = JSON.parse(line);
  } catch (err) {
    return { problem: `not valid JSON (${err.message})` };
  }
  let canonical;
  try {
    canonical = canonicalize(value);
  } catch (err) {
    return { problem: `cannot be canonicalised (${err.message})` };
  }
  if (canonical !== line) return { value, problem: 'the line is not in its canonical form: it was altered after export' };
  return { value, problem: null };
}

/**
 * Checks one sealed document on its own: form, seal, signature by a pinned key valid at its
 * recordedAt, chain position. Returns { problems, doc, seq, seal (Buffer|null) }.
 */
export function checkDocument(line, keys) {
  const { value: doc, problem } = parseCanonical(line);
  const problems = problem ? [problem] : [];
  if (!isObject(doc)) return { problems: problems.length ? problems : ['not a sealed document object'], doc: null, seq: null, seal: null };
  if (!DOCUMENT_FORMATS.has(doc.format)) problems.push(`unknown document format ${JSON.stringify(doc.format)}`);
  const extra = Object.keys(doc).filter((k) => !DOCUMENT_MEMBERS.has(k));
  if (extra.length) problems.push(`unexpected member(s) ${extra.join(', ')}`);
  const rec = doc.record;
  if (!isObject(rec)) return { problems: [...problems, 'no record'], doc, seq: null, seal: null };
  const seq = Number.isSafeInteger(rec.sequence) && rec.sequence >= 1 ? rec.sequence : null;
  if (seq === null) problems.push('the record has no valid chain position (sequence)');
  if (!isHash(doc.seal)) return { problems: [...problems, 'the seal is not 64 lower-case hex digits'], doc, seq, seal: null };
  const seal = Buffer.from(doc.seal, 'hex');
  let digest = null;
  try {
    digest = createHash('sha256').update(canonicalize(rec), 'utf8').digest();
  } catch (err) {
    problems.push(`the record cannot be canonicalised (${err.message})`);
  }
  if (digest && !digest.equals(seal)) problems.push('the SHA-256 of the canonical record is not the seal: the record or the seal was changed');
  const sigProblem = checkSignature(keys, doc.kid, rec.recordedAt, seal, doc.signature);
  if (sigProblem) problems.push(`the seal signature: ${sigProblem}`);
  if (seq === 1 && rec.previousSeal !== null) problems.push('position 1 names a previous seal');
  if (seq !== null && seq > 1 && !isHash(rec.previousSeal)) problems.push('the record names no previous seal');
  if (doc.format === WITHDRAWAL_FORMAT) problems.push(...withdrawalProblems(rec, seq));
  return { problems, doc, seq, seal };
}

/** What a withdrawal record must say on its own: which earlier verdict (id, seal, position) it withdraws, and why. */
function withdrawalProblems(rec, seq) {
  const problems = [];
  if (rec.format !== WITHDRAWAL_RECORD_FORMAT) problems.push(`a withdrawal document whose record is not a ${WITHDRAWAL_RECORD_FORMAT}`);
  const v = rec.verdict;
  if (!isObject(v) || typeof v.id !== 'string' || !isHash(v.seal) || !Number.isSafeInteger(v.sequence) || v.sequence < 1) {
    problems.push('the withdrawal names no verdict (id, seal, sequence)');
  } else if (seq !== null && v.sequence >= seq) problems.push(`the withdrawal names position ${v.sequence}, not an earlier one`);
  if (typeof rec.reason !== 'string' || rec.reason.trim() === '') problems.push('the withdrawal gives no reason');
  if (!isObject(rec.withdrawnBy)) problems.push('the withdrawal does not say who withdrew the verdict');
  return problems;
}

/** Seals seen, by position: in-order positions in two growing arrays, the rest in a map. */
class SealIndex {
  constructor() {
    this.seqs = new Float64Array(1024);
    this.seals = Buffer.alloc(1024 * 32);
    this.lines = new Float64Array(1024);
    this.n = 0;
    this.extra = new Map();
  }

  append(seq, seal, line) {
    if (this.n === this.seqs.length) {
      const grow = (a, C) => {
        const b = new C(a.length * 2);
        b.set(a);
        return b;
      };
      this.seqs = grow(this.seqs, Float64Array);
      this.lines = grow(this.lines, Float64Array);
      const s = Buffer.alloc(this.seals.length * 2);
      this.seals.copy(s);
      this.seals = s;
    }
    this.seqs[this.n] = seq;
    this.lines[this.n] = line;
    seal.copy(this.seals, this.n * 32);
    this.n++;
  }

  find(seq) {
    let lo = 0;
    let hi = this.n - 1;
    while (lo <= hi) {
      const mid = (lo + hi) >> 1;
      if (this.seqs[mid] === seq) return { seal: this.seals.subarray(mid * 32, mid * 32 + 32), line: this.lines[mid] };
      if (this.seqs[mid] < seq) lo = mid + 1;
      else hi = mid - 1;
    }
    return this.extra.get(seq) ?? null;
  }
}

/** Checks the header line; returns { header, cp, problems }. */
function checkHeader(line, keys, pinned) {
  const { value: h, problem } = parseCanonical(line);
  const problems = problem ? [`the header: ${problem}`] : [];
  if (!isObject(h)) return { header: null, cp: null, problems: problems.length ? problems : ['the header is not a JSON object'] };
  if (h.format !== EXPORT_FORMAT) return { header: null, cp: null, problems: [...problems, `the first line is not a ${EXPORT_FORMAT} header (format ${JSON.stringify(h.format)})`] };
  const extra = Object.keys(h).filter((k) => !HEADER_MEMBERS.has(k));
  if (extra.length) problems.push(`the header has unexpected member(s) ${extra.join(', ')}`);
  const cp = h.checkpoint;
  problems.push(...checkCheckpoint(cp, keys));
  if (typeof h.organisationId !== 'string') problems.push('the header names no organisationId');
  else if (isObject(cp) && cp.organisationId !== h.organisationId) problems.push("the header's organisation is not its checkpoint's organisation");
  if (typeof h.complete !== 'boolean') problems.push('the header does not say whether the export is complete');
  if (!Number.isSafeInteger(h.from) || !Number.isSafeInteger(h.to) || h.from < 1 || h.from > h.to) problems.push('the header has no valid range from..to');
  else if (isObject(cp) && Number.isSafeInteger(cp.treeSize)) {
    if (h.to > cp.treeSize) problems.push(`the header's range ends at ${h.to}, beyond the checkpoint's tree size ${cp.treeSize}`);
    if (h.complete === true) {
      if (h.filter !== null) problems.push('a complete export names a filter');
      if (h.to !== cp.treeSize) problems.push(`a complete export must end at the checkpoint's tree size ${cp.treeSize}, but the header says to ${h.to}`);
      const start = pinned ? pinned.treeSize + 1 : 1;
      if (h.from !== start) {
        problems.push(pinned
          ? `the export starts at position ${h.from}, not right after the pinned checkpoint (position ${start})`
          : `a complete export must start at position 1 (or right after a checkpoint pinned with --from-checkpoint), but this one starts at ${h.from}`);
      }
    } else if (h.complete === false && (h.filter === null || h.filter === undefined)) problems.push('a partial export names no filter');
  }
  if (pinned && isObject(cp) && pinned.organisationId !== cp.organisationId) problems.push('the pinned checkpoint is of another organisation');
  if (pinned && isObject(cp) && pinned.treeSize > cp.treeSize) problems.push(`the pinned checkpoint (size ${pinned.treeSize}) is larger than the export's (size ${cp.treeSize})`);
  return { header: h, cp, problems };
}

/**
 * Verifies an export file. `opts`: keys, pinned (a checkpoint object or null), loadKept(organisationId)
 * (the folder's checkpoints: {kept: [{cp,file}], problems}), proofs, quiet, print(line). Returns
 * { status: 'verified'|'partial'|'single'|'failed', cp, checkpointsToKeep }.
 */
export async function verifyExport(file, opts) {
  const { keys, pinned = null, proofs = [], quiet = false, print } = opts;
  const lines = createInterface({ input: createReadStream(file, { encoding: 'utf8' }), crlfDelay: Infinity });
  const it = lines[Symbol.asyncIterator]();
  const first = await it.next();
  if (first.done || first.value === '') {
    print('FAIL  the export is empty (no header line)');
    return { status: 'failed' };
  }

  // A single sealed document (GET /v1/verdicts/{id}/export) rather than an export.
  const firstValue = (() => {
    try {
      return JSON.parse(first.value);
    } catch {
      return null;
    }
  })();
  if (isObject(firstValue) && DOCUMENT_FORMATS.has(firstValue.format)) {
    const second = await it.next();
    lines.close();
    if (!second.done && second.value !== '') {
      print(`FAIL  the file holds sealed documents but no ${EXPORT_FORMAT} header: an export without a checkpoint proves nothing about completeness (fetch a new export)`);
      return { status: 'failed' };
    }
    const { problems, seq, doc } = checkDocument(first.value, keys);
    if (problems.length) {
      print(`FAIL  position ${seq ?? '?'}: ${problems.join('; ')}`);
      print('0 of 1 sealed verdict(s) verified');
      return { status: 'failed' };
    }
    print(`ok    position ${seq}  seal ${doc.seal}`);
    print('all 1 sealed verdict(s) verified: the record hashes to its seal and the seal is signed by a pinned key valid at its recordedAt');
    print('its place in the ledger is not proven: a single document carries no checkpoint (verify an export for that)');
    return { status: 'single' };
  }

  const { header, cp, problems: headerProblems } = checkHeader(first.value, keys, pinned);
  if (headerProblems.length) {
    for (const p of headerProblems) print(`FAIL  header: ${p}`);
    lines.close();
    return { status: 'failed' };
  }
  if (pinned) {
    const bad = checkCheckpoint(pinned, keys);
    if (bad.length) {
      for (const p of bad) print(`FAIL  pinned checkpoint: ${p}`);
      lines.close();
      return { status: 'failed' };
    }
  }
  let failures = 0;
  const fail = (text) => {
    failures++;
    print(`FAIL  ${text}`);
  };
  let kept = [];
  if (opts.loadKept) {
    const loaded = opts.loadKept(cp.organisationId);
    kept = loaded.kept;
    for (const p of loaded.problems) fail(p);
  }
  const complete = header.complete;
  const root = Buffer.from(cp.rootHash, 'hex');
  const index = new SealIndex();
  const gaps = []; // [from, to] ranges passed over, until filled (out of order)
  let members = 0;
  let proven = 0;
  let maxSeq = 0;
  let prev = null; // { seq, seal } of the previous line
  let ordered = true; // every line so far at exactly the next position
  let tree = null; // compact range of the leaves so far, for roots (complete exports only)
  const withdrawn = new Map(); // position of a withdrawn verdict → line of its withdrawal
  let withdrawals = 0;
  const rootsAt = new Map();
  const wanted = new Set([...kept.map((k) => k.cp.treeSize), ...(pinned ? [pinned.treeSize] : [])]);
  let lineNo = 1;

  for (;;) {
    const next = await it.next();
    if (next.done) break;
    lineNo++;
    const line = next.value;
    if (line === '') {
      fail(`line ${lineNo}: an empty line`);
      continue;
    }
    members++;
    const { problems, doc, seq, seal } = checkDocument(line, keys);
    const where = `line ${lineNo}  position ${seq ?? '?'}`;
    if (doc && isObject(doc.record)) {
      const org = doc.record.organisation;
      if (!isObject(org) || org.id !== header.organisationId) problems.push(`a record of another organisation (${JSON.stringify(isObject(org) ? org.id : org)}) in the export of ${header.organisationId}`);
    }
    let leftOf = null;
    if (seq !== null && seal) {
      if (seq < header.from || seq > header.to) problems.push(`position ${seq} is outside the header's range ${header.from}–${header.to}`);
      const inc = doc.inclusion;
      if (!isObject(inc) || !Array.isArray(inc.hashes) || !inc.hashes.every(isHash)) problems.push('no inclusion proof {leafIndex, treeSize, hashes}');
      else if (inc.leafIndex !== seq - 1 || inc.treeSize !== cp.treeSize) problems.push(`the inclusion proof is for leaf ${inc.leafIndex} of ${inc.treeSize}, not leaf ${seq - 1} of the checkpoint's ${cp.treeSize}`);
      else {
        const v = verifyInclusion(seq - 1, cp.treeSize, leafHash(seal), inc.hashes.map((h) => Buffer.from(h, 'hex')), root);
        if (!v.ok) problems.push('the inclusion proof does not lead to the checkpoint root');
        else leftOf = v.left;
      }
      // order, duplicates and forks
      if (seq <= maxSeq) {
        const earlier = index.find(seq);
        ordered = false;
        if (earlier) {
          problems.push(earlier.seal.equals(seal) ? `a duplicate of line ${earlier.line}` : `a fork: a second, different seal at position ${seq} (line ${earlier.line} has ${earlier.seal.toString('hex')})`);
        } else {
          problems.push(`out of order: position ${seq} comes after position ${maxSeq}`);
          index.extra.set(seq, { seal, line: lineNo });
          const g = gaps.findIndex(([a, b]) => a <= seq && seq <= b);
          if (g >= 0) {
            const [a, b] = gaps[g];
            gaps.splice(g, 1, ...[[a, seq - 1], [seq + 1, b]].filter(([x, y]) => x <= y));
          }
        }
      } else {
        const expected = maxSeq === 0 ? header.from : maxSeq + 1;
        if (seq > expected) {
          if (complete) gaps.push([expected, seq - 1]);
          ordered = false;
        }
        index.append(seq, seal, lineNo);
        maxSeq = seq;
      }
      // a withdrawal names a verdict the export holds (by seal), and a verdict is withdrawn once
      if (doc.format === WITHDRAWAL_FORMAT && isObject(doc.record.verdict) && Number.isSafeInteger(doc.record.verdict.sequence)) {
        const named = doc.record.verdict;
        const target = index.find(named.sequence);
        if (target && target.seal.toString('hex') !== named.seal) problems.push(`the withdrawal names seal ${named.seal} at position ${named.sequence}, but line ${target.line} has ${target.seal.toString('hex')} there`);
        else if (!target && complete && named.sequence >= header.from) problems.push(`the withdrawn verdict at position ${named.sequence} is not in the export`);
        if (withdrawn.has(named.sequence)) problems.push(`the verdict at position ${named.sequence} was withdrawn before, on line ${withdrawn.get(named.sequence)}`);
        else withdrawn.set(named.sequence, lineNo);
        withdrawals++;
      }
      // links by previous seal, wherever two lines are neighbours in the chain
      if (prev && seq === prev.seq + 1 && doc.record.previousSeal !== prev.seal.toString('hex')) problems.push(`does not link to the seal of position ${prev.seq} on the line before`);
      // the root, from the leaves (complete exports, while in order)
      if (complete && ordered) {
        if (seq === header.from && header.from > 1) {
          tree = leftOf ? CompactRange.resume(seq - 1, leftOf) : null;
          const pinnedRoot = pinned ? Buffer.from(pinned.rootHash, 'hex') : null;
          if (!tree || !tree.root().equals(pinnedRoot)) {
            problems.push(`the export's tree does not extend the pinned checkpoint: its first ${seq - 1} leaves do not give the pinned checkpoint's root — the history was rewritten`);
            tree = null;
          } else rootsAt.set(tree.size, tree.root());
        } else if (seq === 1) tree = new CompactRange();
        if (tree) {
          tree.push(seal);
          if (wanted.has(tree.size)) rootsAt.set(tree.size, tree.root());
        }
      }
    }
    if (problems.length) fail(`${where}: ${problems.join('; ')}`);
    else proven++;
    if (!problems.length && !quiet) print(`ok    ${where}  seal ${doc.seal}  included at leaf ${seq - 1} of ${cp.treeSize}`);
    prev = seq !== null && seal ? { seq, seal } : null;
  }

  if (complete) {
    for (const [a, b] of gaps) fail(`${range(a, b)} ${a === b ? 'is' : 'are'} missing (a gap)`);
    if (maxSeq < header.to) {
      const a = Math.max(maxSeq + 1, header.from);
      fail(`${range(a, header.to)} ${a === header.to ? 'is' : 'are'} missing: the export ends before the checkpoint's tree size ${cp.treeSize} (truncated)`);
      ordered = false;
    }
    if (ordered && tree && tree.size === cp.treeSize && !tree.root().equals(root)) fail(`the root recomputed from all leaves, ${tree.root().toString('hex')}, is not the checkpoint root`);
    if (ordered && (!tree || tree.size !== cp.treeSize) && failures === 0) fail('the root could not be recomputed from the leaves');
  } else if (members === 0) {
    print('note  the partial export has no members');
  }

  // The checkpoint(s) against the ones the auditor kept.
  const rootAt = (size) => (complete && ordered ? rootsAt.get(size) ?? null : null);
  const toKeep = [];
  let keptNow = kept;
  if (pinned) {
    const { problems, notes } = checkAgainstKept(pinned, keptNow, { rootAt, proofs });
    for (const n of notes) if (!quiet) print(`note  pinned checkpoint: ${n}`);
    for (const p of problems) fail(`pinned checkpoint: ${p}`);
    keptNow = [...keptNow, { cp: pinned, file: '(pinned)' }];
    toKeep.push(pinned);
  }
  if (opts.loadKept) {
    const { problems, notes } = checkAgainstKept(cp, keptNow, { rootAt, proofs });
    for (const n of notes) print(`note  ${n}`);
    for (const p of problems) fail(p);
    if (kept.length === 0) print(`note  no checkpoint of ${cp.organisationId} kept before: this one is kept as the first`);
  }
  toKeep.push(cp);

  print('');
  print(`organisation  ${header.organisationId}`);
  print(`checkpoint    ${describe(cp)} key ${cp.kid}`);
  if (withdrawals > 0) print(`withdrawals   ${withdrawals} sealed withdrawal(s) of verdicts, each naming the verdict's seal`);
  if (complete) {
    print(`covered       ${range(header.from, header.to)} of ${cp.treeSize}: ${failures === 0 ? `complete from position ${header.from}${pinned ? ' (after the pinned checkpoint)' : ''}, no gap, duplicate, fork or reordering, each record linked to the one before, the root recomputed from the leaves` : 'claimed by the header, but NOT verified complete and intact (see FAIL above)'}`);
  } else {
    print(`covered       PARTIAL export (filter ${JSON.stringify(header.filter)}): ${proven} of ${members} verdict(s) proven by inclusion proofs in the checkpoint of size ${cp.treeSize}, positions ${header.from}–${header.to}`);
    print('              nothing is claimed about the verdicts left out: this does not show the ledger holds no others');
  }
  if (!opts.loadKept) print('note  no --checkpoints folder: consistency with checkpoints seen before was not checked');
  if (failures > 0) return { status: 'failed', failures, cp };
  return { status: complete ? 'verified' : 'partial', cp, toKeep, members };
}
