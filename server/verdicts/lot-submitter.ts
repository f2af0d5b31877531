// Who submitted a lot, as its verdict names them: a console user by id and e-mail, an API key by
// id, name and visible prefix — never a secret or a hash of one. Read at submission time and sealed
// in the record, so a later rename or removal does not change what the verdict says. Raw SQL on a
// prepared statement, on the submission's hot path (see DEVELOPERS.md, "Persistence"); concurrent
// submissions by one credential share a read (freshReads), run beside the product's read.
import type { Sequelize } from 'sequelize';
import type { Principal } from '../core/principal';
import { freshReads, preparedRows } from '../db/raw';

export type Submitter =
  | { kind: 'user'; userId: string; email: string }
  | { kind: 'api-key'; keyId: string; name: string; prefix: string };

const USER = 'SELECT id, email FROM users WHERE id = $1 AND organisation_id = $2';
const KEY = 'SELECT id, name, prefix FROM api_keys WHERE id = $1 AND organisation_id = $2';

const readers = new WeakMap<Sequelize, (key: string) => Promise<Submitter | null>>();

function reader(sequelize: Sequelize): (key: string) => Promise<Submitter | null> {
  let r = readers.get(sequelize);
  if (!r) {
    r = freshReads(async (key) => {
      const [kind, id, org] = key.split('\n') as [string, string, string];
      if (kind === 'user') {
        const [u] = await preparedRows<{ id: string; email: string }>(sequelize, 'lotproof-submitter-user', USER, [id, org]);
        return u ? { kind: 'user', userId: u.id, email: u.email } : null;
      }
      const [k] = await preparedRows<{ id: string; name: string; prefix: string }>(sequelize, 'lotproof-submitter-key', KEY, [id, org]);
      return k ? { kind: 'api-key', keyId: k.id, name: k.name, prefix: k.prefix } : null;
    });
    readers.set(sequelize, r);
  }
  return r;
}

/** The submitter the principal stands for; null only for a principal that names neither (none do today). */
export async function submitterOf(sequelize: Sequelize, principal: Principal): Promise<Submitter | null> {
  if (principal.kind === 'session' && principal.userId) return reader(sequelize)(`user\n${principal.userId}\n${principal.organisationId}`);
  if (principal.kind === 'api-key' && principal.keyId) return reader(sequelize)(`key\n${principal.keyId}\n${principal.organisationId}`);
  return null;
}
