#!/usr/bin/env node
// Lotproof offline verifier: checks an export of sealed verdicts, or a checkpoint on its own, against
// a JWK Set the auditor pinned and the checkpoints the auditor kept — trusting nothing the Lotproof
// server says. Node.js ≥ 20 standard library only. Formats: FORMAT.md; how to use it: README.md.
import { accessSync, constants, readFileSync } from 'node:fs';
import { CheckpointFolder, checkAgainstKept, checkCheckpoint, describe, loadProofs } from './checkpoints.mjs';
import { verifyExport } from './export-check.mjs';
import { loadPinnedJwks } from './keys.mjs';

export { canonicalize } from './canonical.mjs';

const USAGE = `Lotproof offline verifier

  node verify.mjs --jwks <jwks.json> [options] <export.ndjson | verdict.json>
  node verify.mjs checkpoint --jwks <jwks.json> --checkpoints <folder> [--consistency <proofs.json>] <checkpoint.json>

Verifies an NDJSON export (lotproof.export/2): every sealed verdict (canonical form, seal, Ed25519
signature by a pinned key valid at its recordedAt), its inclusion proof in the export's checkpoint,
the checkpoint's own signature, and that the export is complete (no gap, duplicate, fork,
reordering, cut-off tail or record of another organisation) with the root recomputed from the leaves.
The second form checks one checkpoint received on its own (e-mail, webhook) against the kept ones.

Options
  --jwks <file>             the JWK Set you pinned (required); keys outside their nbf/exp window are refused
  --checkpoints <folder>    your folder of checkpoints seen before: each new one must be consistent with
                            them, and is kept there once verified
  --consistency <file>      consistency proofs from the server, a JSON list of {fromSize,toSize,hashes};
                            may be given more than once
  --from-checkpoint <file>  a checkpoint you verified before: the export may start right after it
  --partial                 accept a filtered (partial) export: exit 0 when every member is proven
  --quiet                   print only failures and the summary
  -h, --help                this text

Exit codes
  0  verified (a complete export, a partial one with --partial, a single document, or a checkpoint)
  1  verification failed, or a partial export without --partial
  2  usage error or unreadable input (a file, the JWKS, the proofs)
`;

function parseArgs(argv) {
  const o = { mode: 'export', jwks: null, checkpoints: null, consistency: [], fromCheckpoint: null, partial: false, quiet: false, help: false, files: [] };
  const args = [...argv];
  if (args[0] === 'checkpoint') {
    o.mode = 'checkpoint';
    args.shift();
  }
  while (args.length) {
    const a = args.shift();
    const value = () => {
      const v = args.shift();
      if (v === undefined || v.startsWith('--')) throw new Error(`${a} needs a value`);
      return v;
    };
    if (a === '--help' || a === '-h') o.help = true;
    else if (a === '--jwks') o.jwks = value();
    else if (a === '--checkpoints') o.checkpoints = value();
    else if (a === '--consistency') o.consistency.push(value());
    else if (a === '--from-checkpoint') o.fromCheckpoint = value();
    else if (a === '--partial') o.partial = true;
    else if (a === '--quiet') o.quiet = true;
    else if (a.startsWith('-') && a !== '-') throw new Error(`unknown option ${a}`);
    else o.files.push(a);
  }
  if (o.help) return o;
  if (!o.jwks) throw new Error('--jwks <file> is required: pin the JWK Set you trust');
  if (o.files.length !== 1) throw new Error('give exactly one file to verify');
  if (o.mode === 'checkpoint' && !o.checkpoints) throw new Error('checkpoint mode needs --checkpoints <folder>');
  if (o.mode === 'checkpoint' && o.fromCheckpoint) throw new Error('--from-checkpoint is for exports');
  return o;
}

/** Reads what the user named; any failure here is a usage error (exit 2). */
function readInputs(o) {
  const read = (what, file, parse) => {
    try {
      return parse(readFileSync(file, 'utf8'));
    } catch (err) {
      throw new Error(`cannot read ${what} ${file}: ${err.message}`);
    }
  };
  const keys = read('the JWKS', o.jwks, loadPinnedJwks);
  const proofs = o.consistency.flatMap((f) => read('the consistency proofs', f, loadProofs));
  const pinned = o.fromCheckpoint ? read('the pinned checkpoint', o.fromCheckpoint, JSON.parse) : null;
  // readable at all? (the export itself is streamed later)
  try {
    accessSync(o.files[0], constants.R_OK);
  } catch (err) {
    throw new Error(`cannot read the file ${o.files[0]}: ${err.message}`);
  }
  return { keys, proofs, pinned };
}

async function checkpointMode(o, { keys, proofs }, print) {
  let cp;
  try {
    cp = JSON.parse(readFileSync(o.files[0], 'utf8'));
  } catch (err) {
    print(`FAIL  the checkpoint file is not JSON: ${err.message}`);
    return 1;
  }
  const bad = checkCheckpoint(cp, keys);
  if (bad.length) {
    for (const p of bad) print(`FAIL  ${p}`);
    return 1;
  }
  const folder = new CheckpointFolder(o.checkpoints);
  const { kept, problems: folderProblems } = folder.load(cp.organisationId, keys);
  const { problems, notes } = checkAgainstKept(cp, kept, { proofs });
  for (const n of notes) print(`note  ${n}`);
  for (const p of [...folderProblems, ...problems]) print(`FAIL  ${p}`);
  print(`organisation  ${cp.organisationId}`);
  print(`checkpoint    ${describe(cp)} key ${cp.kid}`);
  if (folderProblems.length || problems.length) {
    print('REJECTED      the checkpoint is not kept');
    return 1;
  }
  const added = folder.save(cp);
  print(kept.length === 0 ? 'VERIFIED      signature valid; the first checkpoint kept for this organisation' : `VERIFIED      signature valid and consistent with ${kept.length} kept checkpoint(s); ${added ? 'now kept' : 'already kept'}`);
  return 0;
}

async function exportMode(o, { keys, proofs, pinned }, print) {
  const folder = o.checkpoints ? new CheckpointFolder(o.checkpoints) : null;
  const result = await verifyExport(o.files[0], {
    keys, pinned, proofs, quiet: o.quiet, print,
    loadKept: folder ? (org) => folder.load(org, keys) : null,
  });
  if (result.status === 'failed') {
    print('FAILED        see the FAIL lines above');
    return 1;
  }
  if (result.status === 'single') return 0;
  if (result.status === 'partial' && !o.partial) {
    print(`PARTIAL       ${result.members} member(s) proven, but a partial export does not show the ledger is complete; pass --partial to accept a partial check`);
    return 1;
  }
  if (folder) for (const cp of result.toKeep) folder.save(cp);
  print(result.status === 'partial' ? `PARTIAL       accepted as a partial check (--partial): ${result.members} member(s) proven` : `VERIFIED      ${result.members} sealed verdict(s)`);
  return 0;
}

export async function main(argv, print = (l) => console.log(l)) {
  let o;
  try {
    o = parseArgs(argv);
  } catch (err) {
    console.error(`usage error: ${err.message}\n\n${USAGE}`);
    return 2;
  }
  if (o.help) {
    print(USAGE);
    return 0;
  }
  let inputs;
  try {
    inputs = readInputs(o);
  } catch (err) {
    console.error(err.message);
    return 2;
  }
  return o.mode === 'checkpoint' ? checkpointMode(o, inputs, print) : exportMode(o, inputs, print);
}

if (import.meta.url === `file://${process.argv[1]}`) process.exitCode = await main(process.argv.slice(2));
