// Demo data: an invented packer, "Fernhill Provisions (demo)", so a new user can try every screen.
// Everything here is invented and labelled as demo; measurements come from a seeded generator.
// Each area adds its own step (users, products, lots) as a module in this folder.
import { chmodSync, existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import type { AppContext } from '../http/context';
import { Organisation } from '../models';
import { issueApiKey, verifyApiKey } from '../identity/api-key-store';
import type { Scope } from '../core/principal';

export const DEMO_ORG = { name: 'Fernhill Provisions (demo)', slug: 'fernhill-demo' };
/** The demo key may do everything a plant system does, but cannot manage keys. */
export const DEMO_KEY_SCOPES: Scope[] = ['lots:submit', 'verdicts:read', 'products:write', 'audit:read'];

export interface DemoCredentials {
  organisationId: string;
  apiKey: string;
  [more: string]: unknown;
}

export interface DemoResult {
  credentials: DemoCredentials;
  banner: string;
}

export type DemoStep = (ctx: AppContext, org: Organisation, creds: DemoCredentials) => Promise<string[]>;

/** Steps added by other areas, run in order after the organisation and key exist. */
const steps: DemoStep[] = [];
export function addDemoStep(step: DemoStep): void {
  steps.push(step);
}

function credentialsFile(ctx: AppContext): string {
  return join(ctx.config.dataDir, 'demo-credentials.json');
}

/** Creates the demo organisation and its key on first run; later runs reuse them. Idempotent. */
export async function seedDemo(ctx: AppContext): Promise<DemoResult> {
  const [org] = await Organisation.findOrCreate({ where: { slug: DEMO_ORG.slug }, defaults: { ...DEMO_ORG, demo: true } });
  const file = credentialsFile(ctx);
  let creds: DemoCredentials | null = null;
  if (existsSync(file)) {
    const saved = JSON.parse(readFileSync(file, 'utf8')) as DemoCredentials;
    const check = saved.organisationId === org.id ? await verifyApiKey(saved.apiKey) : null;
    if (check?.ok) creds = saved;
  }
  if (!creds) {
    const { secret } = await issueApiKey({ organisationId: org.id, name: 'Demo plant system', scopes: DEMO_KEY_SCOPES });
    creds = { organisationId: org.id, apiKey: secret };
  }
  const lines: string[] = [];
  for (const step of steps) lines.push(...(await step(ctx, org, creds)));
  // Local development convenience only: the demo secrets live in the git-ignored data folder, readable by this user alone.
  mkdirSync(ctx.config.dataDir, { recursive: true });
  writeFileSync(file, JSON.stringify(creds, null, 2), { mode: 0o600 });
  chmodSync(file, 0o600);
  const banner = [
    '',
    `Demo data: ${org.name} — an invented packer, for trying Lotproof out.`,
    `  demo API key (scopes ${DEMO_KEY_SCOPES.join(', ')}):`,
    `    ${creds.apiKey}`,
    ...lines,
    `  (kept in ${file}; remove the .data folder to start afresh)`,
  ].join('\n');
  return { credentials: creds, banner };
}
