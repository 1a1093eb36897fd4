/**
 * The demo administrator for `npm start`: created (or its password renewed) at each demo start,
 * with a fresh random password that the demo prints together with a plain warning.
 */
import { generatePassword } from './password.ts';
import { ensureSecurity, type SecurityHost } from './security-setup.ts';

export const DEMO_ADMIN_NAME = 'demo-admin';

export interface DemoCredentials {
  name: string;
  password: string;
  /** Lines to print as they are. */
  notice: string;
}

export async function ensureDemoAdministrator(ctx: SecurityHost, opts: { name?: string; password?: string } = {}): Promise<DemoCredentials> {
  const { auth } = ensureSecurity(ctx);
  const name = opts.name ?? DEMO_ADMIN_NAME;
  const password = opts.password ?? generatePassword(20);
  if (await auth.users.byName(name)) {
    await auth.updateUser(name, { password, role: 'administrator', disabled: false, mustChangePassword: true }, 'system', 'demo start: new demo password');
  } else {
    await auth.createUser({ name, fullName: 'Demo Administrator', role: 'administrator', password, mustChangePassword: true }, 'system');
  }
  const notice = [
    '',
    '  Demo administrator',
    `    user:     ${name}`,
    `    password: ${password}`,
    '',
    '  These are DEMO credentials, printed in clear and renewed at each demo start.',
    '  A real site must not use them: create a named account for each person',
    '  (npm run tideline -- user add --role administrator NAME) and then disable this one',
    `  (npm run tideline -- user disable ${name}).`,
    '',
  ].join('\n');
  return { name, password, notice };
}
