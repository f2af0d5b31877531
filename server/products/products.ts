// Products: the spec a lot is judged against. Editing a product never touches a stored verdict:
// each verdict keeps a copy of the spec it was judged with. Every change (create, change, archive)
// is written to the organisation's audit trail in its own transaction, with the before and after of
// each field it changed (product-changes.ts).
import { Op, QueryTypes, UniqueConstraintError, type Transaction } from 'sequelize';
import { evaluateLot, listRulebooks, type ProductSpec } from '../../shared/engine';
import { DEFAULT_PLAUSIBILITY } from '../../shared/plausibility';
import type { components } from '../../shared/api/schema';
import { Conflict, InvalidInput, NotFound, Refused, TooLarge } from '../core/errors';
import { Product } from './models';
import type { Principal } from '../core/principal';
import { decodeCursor, encodeCursor } from '../core/cursor';
// The organisation's audit trail is the identity area's; product changes are written to it too.
import { recordAudit, type AuditAction } from '../identity/audit-trail';
import { ARCHIVED, fieldChanges, NO_PRODUCT, type FieldChange, type ProductFields } from './product-changes';

export type ProductInput = components['schemas']['ProductInput'];
export type ProductPatch = components['schemas']['ProductPatch'];
export type ProductView = components['schemas']['Product'];

/** The parameter names each rulebook takes (its `info.parameters`); anything else is never kept. */
const PARAMETER_NAMES: ReadonlyMap<string, ReadonlySet<string>> = new Map(listRulebooks().map((r) => [r.id, new Set(r.parameters.map((x) => x.name))]));

/**
 * A rulebook choice with only the parameters its rulebook takes. The API refuses any other name
 * (RulebookChoice in openapi/parts/verdicts.yaml); this also keeps whatever a product stored before
 * that check out of its answers and out of every verdict judged by it (the engine ignores such
 * names, so no result changes).
 */
function ownParams(choice: { id: string; params?: Record<string, unknown> }): { id: string; params?: Record<string, unknown> } {
  if (!choice.params || typeof choice.params !== 'object') return { id: choice.id };
  const names = PARAMETER_NAMES.get(choice.id) ?? new Set<string>();
  const kept = Object.entries(choice.params).filter(([name]) => names.has(name));
  return kept.length > 0 ? { id: choice.id, params: Object.fromEntries(kept) } : { id: choice.id };
}

/**
 * The most a product's fields take as JSON. The schema bounds every field (the largest product it
 * admits is about 25 KiB: a 2 000-character description, 20 addresses of 254 characters, a
 * rulebook choice of a few hundred bytes); this is the backstop should a bound ever be loosened,
 * since a product's spec is copied into every verdict judged by it.
 */
export const PRODUCT_MAX_BYTES = 32 * 1024;

function checkSize(fields: Record<string, unknown>): void {
  const bytes = Buffer.byteLength(JSON.stringify(fields), 'utf8');
  if (bytes > PRODUCT_MAX_BYTES) throw new TooLarge(`the product takes ${bytes} bytes as JSON; at most ${PRODUCT_MAX_BYTES} are accepted`);
}

/** A product's plausible band: its own, or the default (0.5–2 × Qn, common practice: shared/plausibility.ts). */
export function plausibilityOf(p: Pick<Product, 'plausibilityMinFraction' | 'plausibilityMaxFraction'>): { minFraction: number; maxFraction: number } {
  return p.plausibilityMinFraction !== null && p.plausibilityMinFraction !== undefined && p.plausibilityMaxFraction !== null && p.plausibilityMaxFraction !== undefined
    ? { minFraction: p.plausibilityMinFraction, maxFraction: p.plausibilityMaxFraction }
    : { ...DEFAULT_PLAUSIBILITY };
}

function checkPlausibility(band: { minFraction: number; maxFraction: number } | null | undefined): void {
  if (band && !(band.maxFraction > band.minFraction)) {
    throw new InvalidInput('the plausible band is empty: maxFraction must be above minFraction', [{ field: '/plausibility/maxFraction', detail: `must be above minFraction (${band.minFraction})` }]);
  }
}

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
    rulebook: ownParams(p.rulebook) as ProductView['rulebook'],
    alertRecipients: p.alertRecipients,
    plausibility: plausibilityOf(p),
    createdAt: p.createdAt.toISOString(),
    updatedAt: p.updatedAt.toISOString(),
  };
}

/** The engine's view of a product: only the fields that judge a lot, nulls left out. */
export function specOf(p: Pick<ProductView, 'nominalQuantity' | 'unit' | 'tareMode' | 'fixedTare' | 'tareUnit' | 'density' | 'rulebook'>): ProductSpec {
  const rulebook = ownParams(p.rulebook as { id: string; params?: Record<string, unknown> });
  const spec: ProductSpec = { nominalQuantity: p.nominalQuantity, unit: p.unit, tareMode: p.tareMode, rulebook: { id: p.rulebook.id } };
  if (rulebook.params) spec.rulebook.params = rulebook.params as ProductSpec['rulebook']['params'];
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

/**
 * Names that no mail can reach: the top-level domains .example and .invalid, reserved by RFC 2606
 * §2 for documentation and for names that are obviously invalid. The API's examples and the demo
 * packer use .example addresses; an alert to one goes nowhere, so allowing them relays nothing.
 * (.test and .localhost are left out on purpose: a site may route those somewhere.)
 */
const UNREACHABLE_DOMAIN = /\.(example|invalid)$/;

/**
 * Alert recipients are people of the organisation: the address of one of its active users (or an
 * address under a name that reaches no one, above). Anything else would let whoever may edit a
 * product have the server mail verdicts to any address — an open relay, and a way around the
 * `verdicts:read` scope. A refused address is named by its place in the list as sent.
 *
 * The users table is the identity area's; products may not import that area (DEVELOPERS.md,
 * "Map"), so this is one set-based read of it by bind parameters, scoped by the organisation.
 */
async function checkRecipients(organisationId: string, sent: string[] | undefined): Promise<void> {
  if (!sent || sent.length === 0) return;
  const wanted = sent.map((e) => e.trim().toLowerCase());
  const rows = await Product.sequelize!.query<{ email: string }>(
    'SELECT email FROM users WHERE organisation_id = $1 AND removed_at IS NULL AND email = ANY($2::text[])',
    { bind: [organisationId, wanted], type: QueryTypes.SELECT },
  );
  const members = new Set(rows.map((r) => r.email));
  const refused = wanted
    .map((email, i) => ({ email, i }))
    .filter(({ email }) => !members.has(email) && !UNREACHABLE_DOMAIN.test(email.slice(email.lastIndexOf('@') + 1)));
  if (refused.length > 0) {
    throw new Refused(
      'recipient-not-member',
      `alert recipients must be users of your organisation; ${refused.length === 1 ? 'this address is' : 'these addresses are'} not: ${refused.map((r) => r.email).join(', ')}`,
      refused.map(({ i }) => ({ field: `/alertRecipients/${i}`, detail: 'not the address of a user of your organisation' })),
    );
  }
}

function skuTaken(sku: string): Conflict {
  return new Conflict(`an active product with SKU ${JSON.stringify(sku)} already exists`, 'sku-taken');
}

/** Where a request came from, for the audit trail (the principal itself is passed beside it). */
export interface RequestOrigin {
  ip?: string | null;
}

/** The change's audit event, in the change's own transaction: both are stored, or neither. */
function audit(principal: Principal, from: RequestOrigin, action: AuditAction, p: Product, changes: FieldChange[], transaction: Transaction): Promise<void> {
  return recordAudit(principal.organisationId, { principal, ip: from.ip ?? null }, action, { kind: 'product', id: p.id }, { sku: p.sku, name: p.name, changes }, transaction);
}

function fieldsOf(p: ProductView | Product): ProductFields {
  return {
    sku: p.sku,
    name: p.name,
    description: p.description,
    nominalQuantity: p.nominalQuantity,
    unit: p.unit,
    tareMode: p.tareMode,
    fixedTare: p.fixedTare ?? null,
    tareUnit: p.tareUnit ?? null,
    density: p.density ?? null,
    rulebook: ownParams(p.rulebook as { id: string; params?: Record<string, unknown> }),
    alertRecipients: [...p.alertRecipients],
    plausibility: p instanceof Product ? plausibilityOf(p) : (p.plausibility ?? { ...DEFAULT_PLAUSIBILITY }),
  };
}

const inTransaction = <T>(work: (t: Transaction) => Promise<T>): Promise<T> => Product.sequelize!.transaction(work);

export async function createProduct(principal: Principal, input: ProductInput, from: RequestOrigin = {}): Promise<ProductView> {
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
    rulebook: ownParams(input.rulebook) as ProductInput['rulebook'],
    alertRecipients: normaliseRecipients(input.alertRecipients),
    plausibilityMinFraction: input.plausibility?.minFraction ?? null,
    plausibilityMaxFraction: input.plausibility?.maxFraction ?? null,
  };
  checkPlausibility(input.plausibility);
  checkSize(fields);
  checkSpec(specOf(fields));
  await checkRecipients(principal.organisationId, input.alertRecipients);
  try {
    const p = await inTransaction(async (transaction) => {
      const made = await Product.create({ ...fields, organisationId: principal.organisationId }, { transaction });
      await audit(principal, from, 'product.created', made, fieldChanges(NO_PRODUCT, fieldsOf(made)), transaction);
      return made;
    });
    return productView(p);
  } catch (err) {
    if (err instanceof UniqueConstraintError) throw skuTaken(input.sku);
    throw err;
  }
}

async function findActive(organisationId: string, id: string, transaction?: Transaction): Promise<Product> {
  // Under a change, the row is held (FOR UPDATE) so that its "before" is what the change replaces.
  const p = await Product.findOne({ where: { id, organisationId, archivedAt: null }, ...(transaction ? { transaction, lock: transaction.LOCK.UPDATE } : {}) });
  if (!p) throw new NotFound(`no product ${id} in your organisation`);
  return p;
}

export async function getProduct(principal: Principal, id: string): Promise<ProductView> {
  return productView(await findActive(principal.organisationId, id));
}

/** The product with a patch applied, checked the way a new product is. */
function patched(p: Product, patch: ProductPatch): ProductView {
  const next = { ...productView(p), ...patch } as ProductView;
  if (patch.rulebook) next.rulebook = ownParams(patch.rulebook) as ProductView['rulebook'];
  if (patch.alertRecipients) next.alertRecipients = normaliseRecipients(patch.alertRecipients);
  if (patch.plausibility === null) next.plausibility = { ...DEFAULT_PLAUSIBILITY };
  checkPlausibility(patch.plausibility);
  checkSize(next);
  checkSpec(specOf(next));
  return next;
}

export async function updateProduct(principal: Principal, id: string, patch: ProductPatch, from: RequestOrigin = {}): Promise<ProductView> {
  // Checked before any lock is taken (a refused patch costs no transaction) and again on the row as held.
  patched(await findActive(principal.organisationId, id), patch);
  // Only the list as sent is checked: a change of another field is not refused because a user
  // named before has since left (their address stays until the list is changed).
  await checkRecipients(principal.organisationId, patch.alertRecipients);
  try {
    return await inTransaction(async (transaction) => {
      const p = await findActive(principal.organisationId, id, transaction);
      const next = patched(p, patch);
      const changes = fieldChanges(fieldsOf(p), fieldsOf(next));
      // A patch that changes nothing is no change: nothing written, nothing in the audit trail.
      if (changes.length === 0) return productView(p);
      await p.update(
        {
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
          // a band sent is stored as sent; null returns the product to the default band
          ...(patch.plausibility !== undefined
            ? { plausibilityMinFraction: patch.plausibility?.minFraction ?? null, plausibilityMaxFraction: patch.plausibility?.maxFraction ?? null }
            : {}),
          updatedAt: new Date(),
        },
        { transaction },
      );
      await audit(principal, from, 'product.updated', p, changes, transaction);
      return productView(p);
    });
  } catch (err) {
    if (err instanceof UniqueConstraintError) throw skuTaken(patch.sku ?? '');
    throw err;
  }
}

export async function archiveProduct(principal: Principal, id: string, from: RequestOrigin = {}): Promise<void> {
  await inTransaction(async (transaction) => {
    const p = await findActive(principal.organisationId, id, transaction);
    const at = new Date();
    await p.update({ archivedAt: at }, { transaction });
    await audit(principal, from, 'product.archived', p, [{ field: ARCHIVED, before: null, after: at.toISOString() }], transaction);
  });
}

const UUID = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/;
/** An instant as `Date.prototype.toISOString` writes it for years 0001–9999 (what encodeCursor was given). */
const ISO_INSTANT = /^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z$/;

/**
 * A products cursor is [createdAt as toISOString, id]. A forged one must never reach PostgreSQL as
 * something it refuses (that would be a 5xx): anything else is a 400 naming the cursor.
 */
function decodeProductCursor(cursor: string): { at: Date; id: string } {
  const [iso, id] = decodeCursor(cursor, 2);
  const at = typeof iso === 'string' && ISO_INSTANT.test(iso) ? new Date(iso) : null;
  if (!at || Number.isNaN(at.getTime()) || at.toISOString() !== iso || iso.startsWith('0000') || typeof id !== 'string' || !UUID.test(id)) {
    throw new InvalidInput('the cursor is not one this API returned', [{ field: '/cursor', detail: 'not a valid cursor' }]);
  }
  return { at, id };
}

export async function listProducts(
  principal: Principal,
  opts: { limit: number; cursor?: string; sku?: string },
): Promise<{ items: ProductView[]; nextCursor: string | null }> {
  const where: Record<string | symbol, unknown> = { organisationId: principal.organisationId, archivedAt: null };
  if (opts.sku) where.sku = opts.sku;
  if (opts.cursor) {
    const { at, id } = decodeProductCursor(opts.cursor);
    where[Op.or] = [{ createdAt: { [Op.lt]: at } }, { createdAt: at, id: { [Op.lt]: id } }];
  }
  const rows = await Product.findAll({ where, order: [['createdAt', 'DESC'], ['id', 'DESC']], limit: opts.limit + 1 });
  const page = rows.slice(0, opts.limit);
  const last = page[page.length - 1];
  return {
    items: page.map(productView),
    nextCursor: rows.length > opts.limit && last ? encodeCursor([last.createdAt.toISOString(), last.id]) : null,
  };
}
