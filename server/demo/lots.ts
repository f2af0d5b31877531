// Demo step: the invented packer's products, three packing lines, and a few dozen lots over recent
// weeks, judged and sealed like any other. Measurements come from a seeded generator, so every
// fresh start invents the same lots; everything is labelled (demo). Mostly conforming, a few
// nonconforming, one waiting for a second sample.
import { createHash } from 'node:crypto';
import { QueryTypes } from 'sequelize';
import { Product } from '../models';
import { submitLot, SUBMIT_OPERATION, type LotSubmission } from '../verdicts/lot-submission';
import type { Principal } from '../core/principal';
import { createProduct, type ProductInput } from '../products/products';
import { packContents, seededRng, type Rng } from './random';
import { addDemoStep } from './seed';

const PRODUCTS: ProductInput[] = [
  {
    sku: 'DEMO-OATS-500G',
    name: 'Rolled oats 500 g (demo)',
    description: 'Dry good sold by mass; net weights from the in-line checkweigher. Invented demo product.',
    nominalQuantity: 500,
    unit: 'g',
    tareMode: 'none',
    rulebook: { id: 'eu-76-211' },
    alertRecipients: ['quality@fernhill.example'],
  },
  {
    sku: 'DEMO-APPLE-1L',
    name: 'Cloudy apple juice 1 L (demo)',
    description: 'Drink sold by volume, checked by weighing: gross grams less the bottle, through the density at 20 °C. Invented demo product.',
    nominalQuantity: 1000,
    unit: 'mL',
    tareMode: 'fixed',
    fixedTare: 38.0,
    tareUnit: 'g',
    density: 1.045,
    rulebook: { id: 'eu-76-211' },
    alertRecipients: ['quality@fernhill.example'],
  },
  {
    sku: 'DEMO-HONEY-340G',
    name: 'Wildflower honey 340 g (demo)',
    description: 'Jarred; gross weights less the mean of a sample of empty jars. Invented demo product.',
    nominalQuantity: 340,
    unit: 'g',
    tareMode: 'sample',
    rulebook: { id: 'oiml-r87-2016' },
    alertRecipients: [],
  },
];

const LINES = ['Line 1 (demo)', 'Line 2 (demo)', 'Filler 3 (demo)'];
const DAY = 86_400_000;

type Kind = 'good' | 'low-mean' | 'short-pack' | 'second-sample';

function lotFor(rng: Rng, sku: string, kind: Kind, i: number, packedAt: Date): LotSubmission {
  const lotCode = `FH-${packedAt.toISOString().slice(2, 10).replace(/-/g, '')}-${String(i + 1).padStart(2, '0')}`;
  const common = { sku, lotCode, packedAt: packedAt.toISOString(), testing: 'non-destructive' as const, clientReference: `demo-mes-${1000 + i}` };
  if (sku === 'DEMO-OATS-500G') {
    if (kind === 'second-sample') {
      // Lot of 400: a first sample of 30 with two packs below T1 (485 g) but none below T2 (470 g).
      const m = packContents(rng, 30, 504, 1.6);
      m[9] = 481.2;
      m[22] = 483.9;
      return { ...common, line: LINES[0], lotSize: 400, measurementUnit: 'g', measurementBasis: 'net', measurements: m };
    }
    const m = packContents(rng, 50, kind === 'low-mean' ? 496.5 : 503.5, 2.0);
    if (kind === 'short-pack') m[31] = 466.4;
    return { ...common, line: LINES[i % 2], lotSize: 2400, measurementUnit: 'g', measurementBasis: 'net', measurements: m };
  }
  if (sku === 'DEMO-APPLE-1L') {
    const volume = packContents(rng, 50, kind === 'low-mean' ? 996 : 1006, 3.5);
    const gross = volume.map((v) => Math.round((v * 1.045 + 38 + (rng() - 0.5) * 0.4) * 10) / 10);
    return { ...common, line: LINES[2], lotSize: 3000, measurementUnit: 'g', measurementBasis: 'gross', measurements: gross };
  }
  const tareSample = packContents(rng, 10, 182, 1.2);
  const net = packContents(rng, 80, kind === 'low-mean' ? 337.5 : 344.5, 2.2);
  const gross = net.map((v) => Math.round((v + 182 + (rng() - 0.5) * 2) * 10) / 10);
  return { ...common, line: LINES[1], lotSize: 1200, measurementUnit: 'g', measurementBasis: 'gross', measurements: gross, tareSample };
}

addDemoStep(async (ctx, org) => {
  const principal: Principal = { organisationId: org.id, kind: 'api-key', scopes: ['lots:submit', 'products:write'] };
  for (const p of PRODUCTS) {
    const exists = await Product.findOne({ where: { organisationId: org.id, sku: p.sku, archivedAt: null } });
    if (!exists) await createProduct(principal, p);
  }
  const [counted] = await ctx.db.sequelize.query<{ n: number }>('SELECT count(*)::int AS n FROM verdicts WHERE organisation_id = $1', {
    bind: [org.id],
    type: QueryTypes.SELECT,
  });
  if ((counted?.n ?? 0) === 0) {
    const rng = seededRng(20_250_301);
    const start = Date.now() - 35 * DAY;
    const plan: { sku: string; kind: Kind }[] = [];
    for (let i = 0; i < 36; i++) {
      const sku = PRODUCTS[i % 3]!.sku;
      let kind: Kind = 'good';
      if (i === 7 || i === 29) kind = 'low-mean';
      if (i === 18) kind = 'short-pack';
      if (i === 24) kind = 'second-sample';
      plan.push({ sku: kind === 'second-sample' || kind === 'short-pack' ? 'DEMO-OATS-500G' : sku, kind });
    }
    for (const [i, p] of plan.entries()) {
      const packedAt = new Date(start + i * (34 * DAY) / plan.length + 6 * 3_600_000);
      const body = lotFor(rng, p.sku, p.kind, i, packedAt);
      // keyed as if the body were sent as this JSON text, so a second seeding replays it
      const requestHash = createHash('sha256').update('json\n').update(JSON.stringify(body)).digest('hex');
      const claim = { organisationId: principal.organisationId, operation: SUBMIT_OPERATION, key: `demo-lot-${i}`, requestHash };
      await submitLot(ctx.db.sequelize, ctx.config, principal, { sub: body, source: { format: 'json' } }, claim);
    }
  }
  const rows = await ctx.db.sequelize.query<{ decision: string; n: number }>(
    'SELECT decision, count(*)::int AS n FROM verdicts WHERE organisation_id = $1 GROUP BY decision ORDER BY decision',
    { bind: [org.id], type: QueryTypes.SELECT },
  );
  return [`  demo lots: ${rows.map((r) => `${r.n} ${r.decision}`).join(', ')} (3 products, 3 lines; sealed in the demo ledger)`];
});
