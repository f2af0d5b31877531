// Which product a lot is of, read on the submission's hot path: by productId or SKU, in the
// caller's organisation, with what the record needs of it (organisation name, alert recipients).
// Raw SQL on a prepared statement (see DEVELOPERS.md, "Persistence"); the products area's model
// serves the product CRUD.
import type { Sequelize } from 'sequelize';
import type { LotData, ProductSpec } from '../../shared/engine';
import type { components } from '../../shared/api/schema';
import { InvalidInput, Refused } from '../core/errors';
import { freshReads, preparedRows } from '../db/raw';
import { specOf } from '../products/products';
import { DEFAULT_PLAUSIBILITY, type PlausibilityBand } from '../../shared/plausibility';
import type { FirstSample } from './second-sample';

type LotSubmission = components['schemas']['LotSubmission'];

export interface LotProduct {
  id: string;
  sku: string;
  name: string;
  nominal_quantity: number;
  unit: string;
  tare_mode: string;
  fixed_tare: number | null;
  tare_unit: string | null;
  density: number | null;
  rulebook: { id: string; params?: Record<string, unknown> };
  alert_recipients: string[];
  organisation_name: string;
  archived: boolean;
  plausibility_min_fraction: number | null;
  plausibility_max_fraction: number | null;
}

const PRODUCT_SELECT = `SELECT p.id, p.sku, p.name, p.nominal_quantity, p.unit, p.tare_mode, p.fixed_tare, p.tare_unit, p.density, p.rulebook,
            p.alert_recipients, o.name AS organisation_name, p.archived_at IS NOT NULL AS archived,
            p.plausibility_min_fraction, p.plausibility_max_fraction
     FROM products p JOIN organisations o ON o.id = p.organisation_id
     WHERE p.organisation_id = $1`;
const PRODUCT_BY_ID = `${PRODUCT_SELECT} AND p.id = $2`;
const PRODUCT_BY_SKU = `${PRODUCT_SELECT} AND p.sku = $2 AND p.archived_at IS NULL`;

// Concurrent submissions naming one product share a read issued after each of them arrived.
const productReaders = new WeakMap<Sequelize, (key: string) => Promise<LotProduct[]>>();
function productReader(sequelize: Sequelize): (key: string) => Promise<LotProduct[]> {
  let r = productReaders.get(sequelize);
  if (!r) {
    r = freshReads((key) => {
      const a = key.indexOf('\n');
      const b = key.indexOf('\n', a + 1);
      const [by, org, value] = [key.slice(0, a), key.slice(a + 1, b), key.slice(b + 1)];
      return by === 'id'
        ? preparedRows<LotProduct>(sequelize, 'lotproof-product-by-id', PRODUCT_BY_ID, [org, value])
        : preparedRows<LotProduct>(sequelize, 'lotproof-product-by-sku', PRODUCT_BY_SKU, [org, value]);
    });
    productReaders.set(sequelize, r);
  }
  return r;
}

/** The product's plausibility band, or the default (0.5–2 × Qn, common practice: shared/plausibility.ts) when it sets none. */
export function plausibilityBand(product: LotProduct): PlausibilityBand {
  return product.plausibility_min_fraction !== null && product.plausibility_max_fraction !== null
    ? { minFraction: product.plausibility_min_fraction, maxFraction: product.plausibility_max_fraction }
    : DEFAULT_PLAUSIBILITY;
}

/** The field that named the product: productId when given for a first sample, else sku. */
export function productField(sub: LotSubmission, first: FirstSample | null): 'productId' | 'sku' {
  return sub.productId && !first ? 'productId' : 'sku';
}

/**
 * The product the lot is of. An archived product takes no new lot (reads answer 404 for it too);
 * a second sample still completes the check its first sample started, and must be of its product.
 */
export async function productForLot(sequelize: Sequelize, organisationId: string, sub: LotSubmission, first: FirstSample | null): Promise<LotProduct> {
  const productId = sub.productId ?? first?.productId;
  if (!productId && !sub.sku) throw new InvalidInput('name the product with productId or sku', [{ field: '/sku', detail: 'productId or sku is required' }]);
  const products = await productReader(sequelize)(`${productId ? 'id' : 'sku'}\n${organisationId}\n${productId ?? sub.sku}`);
  const archived = !first && products[0]?.archived === true;
  const product = archived ? undefined : products[0];
  if (product && (!sub.sku || product.sku === sub.sku) && (!first || product.id === first.productId)) return product;
  const detail = first && product && product.id !== first.productId
    ? `the first sample was of another product`
    : archived
      ? `product ${JSON.stringify(products[0]!.id)} is archived; an archived product takes no new lots`
      : `no product ${JSON.stringify(productId && !first ? productId : sub.sku)} in your organisation`;
  throw new Refused('lot-not-judged', detail, [{ field: `/${productField(sub, first)}`, detail }]);
}

/** The engine's input for a first sample: the product's spec and the submitted lot. */
export function firstSampleLot(product: LotProduct, sub: LotSubmission): { spec: ProductSpec; lot: LotData; lotCode: string } {
  const missing = (['lotCode', 'lotSize', 'testing'] as const).filter((k) => sub[k] === undefined);
  if (missing.length > 0) throw new InvalidInput(`missing ${missing.join(', ')}`, missing.map((k) => ({ field: `/${k}`, detail: 'required' })));
  const spec = specOf({
    nominalQuantity: product.nominal_quantity,
    unit: product.unit as ProductSpec['unit'],
    tareMode: product.tare_mode as ProductSpec['tareMode'],
    fixedTare: product.fixed_tare,
    tareUnit: product.tare_unit as ProductSpec['unit'] | null,
    density: product.density,
    rulebook: product.rulebook as never,
  });
  return {
    spec,
    lotCode: sub.lotCode!,
    lot: {
      lotSize: sub.lotSize!,
      testing: sub.testing!,
      measurementUnit: sub.measurementUnit,
      ...(sub.measurementBasis ? { measurementBasis: sub.measurementBasis } : {}),
      measurements: sub.measurements,
      ...(sub.tares ? { tares: sub.tares } : {}),
      ...(sub.tareSample ? { tareSample: sub.tareSample } : {}),
    },
  };
}
