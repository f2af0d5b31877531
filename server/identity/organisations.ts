// Organisations (tenants): created by an operator (CLI); every customer row belongs to one.
import { Organisation } from './organisation-model';
import { Conflict, InvalidInput } from '../core/errors';
import { recordAudit } from './audit-trail';

export const SLUG = /^[a-z0-9][a-z0-9-]{0,62}$/;

export async function createOrganisation(input: { name: string; slug: string; demo?: boolean }): Promise<Organisation> {
  const name = input.name.trim();
  if (!name || name.length > 200) throw new InvalidInput('The name must have 1 to 200 characters.', [{ field: '/name', detail: 'length' }]);
  if (!SLUG.test(input.slug)) {
    throw new InvalidInput('The slug must be lower-case letters, digits and dashes (up to 63).', [{ field: '/slug', detail: 'pattern' }]);
  }
  if (await Organisation.findOne({ where: { slug: input.slug } })) throw new Conflict(`The slug ${input.slug} is taken.`);
  const org = await Organisation.create({ name, slug: input.slug, demo: input.demo ?? false });
  await recordAudit(org.id, { kind: 'operator', label: 'operator CLI' }, 'organisation.created', { kind: 'organisation', id: org.id }, { name, slug: org.slug });
  return org;
}

export async function findOrganisation(idOrSlug: string): Promise<Organisation | null> {
  return /^[0-9a-f-]{36}$/.test(idOrSlug) ? Organisation.findByPk(idOrSlug) : Organisation.findOne({ where: { slug: idOrSlug } });
}
