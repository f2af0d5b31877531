// Products: the spec a lot is judged against. Editing a product never touches a stored verdict:
// each verdict keeps a copy of the spec it was judged with.
import { Op, UniqueConstraintError } from 'sequelize';
import { evaluateLot, type ProductSpec } from '../../shared/engine';
import type { components } from '../../shared/api/schema';
import { Conflict, InvalidInput, NotFound, Refused } from '../core/errors';
import { Product } from './models';
import type { Principal } from '../core/principal';
import { decodeCursor, encodeCursor } from '../core/cursor';

export type ProductInput = components['schemas']['ProductInput'];
export type ProductPatch = components['schemas']['ProductPatch'];
export type ProductView = components['schemas']['Product'];

export function productView(p: Product): ProductView {
  return {
    id: p.id,
    sku: p.sku,
    name: p.name,
    description: p.description,
    nominalQuantity: p.nominalQuantity,
    unit: p.unit as ProductView['unit'],
    tareMode: p.tareMode as ProductView['tareMode'],
    fixedTare: p.fixedTare,
    tareUnit: p.tareUnit as ProductView['tareUnit'],
    density: p.density,
    rulebook: p.rulebook as ProductView['rulebook'],
    alertRecipients: p.alertRecipients,
    createdAt: p.createdAt.toISOString(),
    updatedAt: p.updatedAt.toISOString(),
  };
}

/** The engine's view of a product: only the fields that judge a lot, nulls left out. */
export function specOf(p: Pick<ProductView, 'nominalQuantity' | 'unit' | 'tareMode' | 'fixedTare' | 'tareUnit' | 'density' | 'rulebook'>): ProductSpec {
  const spec: ProductSpec = { nominalQuantity: p.nominalQuantity, unit: p.unit, tareMode: p.tareMode, rulebook: { id: p.rulebook.id } };
  if (p.rulebook.params && Object.keys(p.rulebook.params).length > 0) spec.rulebook.params = p.rulebook.params as ProductSpec['rulebook']['params'];
  if (p.fixedTare !== null && p.fixedTare !== undefined) spec.fixedTare = p.fixedTare;
  if (p.tareUnit !== null && p.tareUnit !== undefined) spec.tareUnit = p.tareUnit;
  if (p.density !== null && p.density !== undefined) spec.density = p.density;
  return spec;
}

/**
 * Checks a spec the way the engine will read it, by judging a trivial lot with it: a spec the
 * engine would refuse is refused here, naming the field, instead of failing every lot later.
 */
function checkSpec(spec: ProductSpec): void {
  if (spec.tareMode === 'fixed' && spec.fixedTare === undefined) {
    throw new InvalidInput('tare mode fixed needs fixedTare', [{ field: '/fixedTare', detail: 'required when tareMode is fixed' }]);
  }
  const q = spec.nominalQuantity;
  const probe = evaluateLot({
    product: spec,
    lot: { lotSize: 1000, testing: 'non-destructive', measurementUnit: spec.unit, measurementBasis: 'net', measurements: [q, q, q] },
  });
  if (!probe.ok && probe.error.pointer.startsWith('/product')) {
    const field = probe.error.pointer.slice('/product'.length);
    throw new Refused('validation', probe.error.message, [{ field, detail: probe.error.message }]);
  }
}

function normaliseRecipients(list: string[] | undefined): string[] {
  return [...new Set((list ?? []).map((e) => e.trim().toLowerCase()))];
}

function skuTaken(sku: string): Conflict {
  return new Conflict(`an active product with SKU ${JSON.stringify(sku)} already exists`, 'sku-taken');
}

export async function createProduct(principal: Principal, input: ProductInput): Promise<ProductView> {
  const fields = {
    sku: input.sku,
    name: input.name,
    description: input.description ?? '',
    nominalQuantity: input.nominalQuantity,
    unit: input.unit,
    tareMode: input.tareMode,
    fixedTare: input.fixedTare ?? null,
    tareUnit: input.tareUnit ?? null,
    density: input.density ?? null,
    rulebook: input.rulebook,
    alertRecipients: normaliseRecipients(input.alertRecipients),
  };
  checkSpec(specOf(fields));
  try {
    const p = await Product.create({ ...fields, organisationId: principal.organisationId });
    return productView(p);
  } catch (err) {
    if (err instanceof UniqueConstraintError) throw skuTaken(input.sku);
    throw err;
  }
}

async function findActive(organisationId: string, id: string): Promise<Product> {
  const p = await Product.findOne({ where: { id, organisationId, archivedAt: null } });
  if (!p) throw new NotFound(`no product ${id} in your organisation`);
  return p;
}

export async function getProduct(principal: Principal, id: string): Promise<ProductView> {
  return productView(await findActive(principal.organisationId, id));
}

export async function updateProduct(principal: Principal, id: string, patch: ProductPatch): Promise<ProductView> {
  const p = await findActive(principal.organisationId, id);
  const next = { ...productView(p), ...patch } as ProductView;
  if (patch.alertRecipients) next.alertRecipients = normaliseRecipients(patch.alertRecipients);
  checkSpec(specOf(next));
  try {
    await p.update({
      sku: next.sku,
      name: next.name,
      description: next.description,
      nominalQuantity: next.nominalQuantity,
      unit: next.unit,
      tareMode: next.tareMode,
      fixedTare: next.fixedTare,
      tareUnit: next.tareUnit,
      density: next.density,
      rulebook: next.rulebook,
      alertRecipients: next.alertRecipients,
      updatedAt: new Date(),
    });
  } catch (err) {
    if (err instanceof UniqueConstraintError) throw skuTaken(next.sku);
    throw err;
  }
  return productView(p);
}

export async function archiveProduct(principal: Principal, id: string): Promise<void> {
  const p = await findActive(principal.organisationId, id);
  await p.update({ archivedAt: new Date() });
}

export async function listProducts(
  principal: Principal,
  opts: { limit: number; cursor?: string; sku?: string },
): Promise<{ items: ProductView[]; nextCursor: string | null }> {
  const where: Record<string | symbol, unknown> = { organisationId: principal.organisationId, archivedAt: null };
  if (opts.sku) where.sku = opts.sku;
  if (opts.cursor) {
    const c = decodeCursor(opts.cursor, 2);
    const at = new Date(c[0]!);
    where[Op.or] = [{ createdAt: { [Op.lt]: at } }, { createdAt: at, id: { [Op.lt]: c[1] } }];
  }
  const rows = await Product.findAll({ where, order: [['createdAt', 'DESC'], ['id', 'DESC']], limit: opts.limit + 1 });
  const page = rows.slice(0, opts.limit);
  const last = page[page.length - 1];
  return {
    items: page.map(productView),
    nextCursor: rows.length > opts.limit && last ? encodeCursor([last.createdAt.toISOString(), last.id]) : null,
  };
}
