/** Users and their roles (table auth_users). Passwords only as scrypt hashes (password.ts). */
import type Database from 'better-sqlite3';
import { isRole, type AuthUser, type Role } from './types.ts';

export const USER_NAME_RE = /^[A-Za-z0-9][A-Za-z0-9._-]{1,63}$/;

export interface UserRow {
  id: number;
  name: string;
  full_name: string;
  role: string;
  password_hash: string;
  must_change_password: number;
  created_at: string;
  created_by: string;
  password_changed_at: string;
  disabled_at: string | null;
}

/** What the API shows of a user (never the hash). */
export interface UserView extends AuthUser {
  mustChangePassword: boolean;
  createdAt: string;
  createdBy: string;
  passwordChangedAt: string;
  disabledAt: string | null;
}

export function toAuthUser(r: UserRow): AuthUser {
  if (!isRole(r.role)) throw new Error(`user ${r.name} has an unknown role ${r.role}`);
  return { id: r.id, name: r.name, fullName: r.full_name, role: r.role };
}

export function toUserView(r: UserRow): UserView {
  return {
    ...toAuthUser(r),
    mustChangePassword: r.must_change_password === 1,
    createdAt: r.created_at,
    createdBy: r.created_by,
    passwordChangedAt: r.password_changed_at,
    disabledAt: r.disabled_at,
  };
}

export class UserStore {
  constructor(private readonly db: Database.Database) {}

  byName(name: string): UserRow | undefined {
    return this.db.prepare('SELECT * FROM auth_users WHERE name = ?').get(name) as UserRow | undefined;
  }

  byId(id: number): UserRow | undefined {
    return this.db.prepare('SELECT * FROM auth_users WHERE id = ?').get(id) as UserRow | undefined;
  }

  list(): UserRow[] {
    return this.db.prepare('SELECT * FROM auth_users ORDER BY name').all() as UserRow[];
  }

  count(): number {
    return (this.db.prepare('SELECT count(*) AS n FROM auth_users').get() as { n: number }).n;
  }

  insert(u: { name: string; fullName: string; role: Role; passwordHash: string; mustChange: boolean; createdBy: string; at: string }): UserRow {
    const info = this.db
      .prepare(
        'INSERT INTO auth_users (name, full_name, role, password_hash, must_change_password, created_at, created_by, password_changed_at) VALUES (?,?,?,?,?,?,?,?)',
      )
      .run(u.name, u.fullName, u.role, u.passwordHash, u.mustChange ? 1 : 0, u.at, u.createdBy, u.at);
    return this.byId(Number(info.lastInsertRowid))!;
  }

  setPassword(id: number, passwordHash: string, mustChange: boolean, at: string): void {
    this.db
      .prepare('UPDATE auth_users SET password_hash = ?, must_change_password = ?, password_changed_at = ? WHERE id = ?')
      .run(passwordHash, mustChange ? 1 : 0, at, id);
  }

  /** Rehash with a higher cost; not a password change. */
  replaceHash(id: number, passwordHash: string): void {
    this.db.prepare('UPDATE auth_users SET password_hash = ? WHERE id = ?').run(passwordHash, id);
  }

  setRole(id: number, role: Role): void {
    this.db.prepare('UPDATE auth_users SET role = ? WHERE id = ?').run(role, id);
  }

  setFullName(id: number, fullName: string): void {
    this.db.prepare('UPDATE auth_users SET full_name = ? WHERE id = ?').run(fullName, id);
  }

  setDisabled(id: number, at: string | null): void {
    this.db.prepare('UPDATE auth_users SET disabled_at = ? WHERE id = ?').run(at, id);
  }

  activeAdministrators(): number {
    return (
      this.db.prepare("SELECT count(*) AS n FROM auth_users WHERE role = 'administrator' AND disabled_at IS NULL").get() as { n: number }
    ).n;
  }
}
