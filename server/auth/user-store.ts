/** Users and their roles as the API shows them; stored behind server/storage (UserRepository). Passwords only as scrypt hashes (password.ts). */
import type { UserRow } from '../storage/repositories.ts';
import { isRole, type AuthUser } from './types.ts';

export type { UserRow };

export const USER_NAME_RE = /^[A-Za-z0-9][A-Za-z0-9._-]{1,63}$/;


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
