// Demo step: one console user per role in the invented demo packer, with random passwords that the
// start banner prints (they are kept with the other demo credentials in the git-ignored data folder).
import { randomBytes } from 'node:crypto';
import { User } from '../models';
import type { Role } from '../core/principal';
import { hashPassword, verifyPassword } from '../identity/credentials';
import { createUser } from '../identity/users';
import { addDemoStep } from './seed';

const DEMO_USERS: Array<{ role: Role; email: string; name: string }> = [
  { role: 'admin', email: 'admin@fernhill.example', name: 'Demo admin' },
  { role: 'quality', email: 'quality@fernhill.example', name: 'Demo quality engineer' },
  { role: 'auditor', email: 'auditor@fernhill.example', name: 'Demo auditor' },
];

function demoPassword(): string {
  return `demo-${randomBytes(9).toString('base64url')}`;
}

addDemoStep(async (_ctx, org, creds) => {
  const saved = (creds.users ?? {}) as Record<string, string>;
  const lines = ['  demo console users (sign in at the console):'];
  for (const u of DEMO_USERS) {
    let password = saved[u.email];
    const existing = await User.findOne({ where: { email: u.email, removedAt: null } });
    if (existing && existing.organisationId !== org.id) continue; // the address belongs elsewhere; leave it alone
    if (!existing) {
      password = password ?? demoPassword();
      await createUser({ organisationId: org.id, email: u.email, name: u.name, role: u.role, password });
    } else if (!password || !(await verifyPassword(password, existing.passwordHash))) {
      password = demoPassword();
      await existing.update({ passwordHash: await hashPassword(password) });
    }
    saved[u.email] = password!;
    lines.push(`    ${u.role.padEnd(8)} ${u.email}  password ${password}`);
  }
  creds.users = saved;
  return lines;
});
