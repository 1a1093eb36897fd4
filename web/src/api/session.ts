/** Browser session: who is signed in (GET /api/auth/me), sign in and out. */
import { get, post } from './http.ts';

export interface Me {
  user: { id: number; name: string; fullName: string; role: string };
  csrfToken?: string;
  expiresAt?: number;
  mustChangePassword?: boolean;
}

/** GET /api/auth/me may answer the user directly or wrapped in { user }. */
export function normaliseMe(x: unknown): Me | null {
  if (!x || typeof x !== 'object') return null;
  const o = x as Record<string, unknown>;
  const u = (o.user && typeof o.user === 'object' ? o.user : o) as Record<string, unknown>;
  if (typeof u.name !== 'string') return null;
  return {
    user: { id: Number(u.id ?? 0), name: u.name, fullName: typeof u.fullName === 'string' ? u.fullName : u.name, role: typeof u.role === 'string' ? u.role : 'viewer' },
    csrfToken: typeof o.csrfToken === 'string' ? o.csrfToken : undefined,
    expiresAt: typeof o.expiresAt === 'number' ? o.expiresAt : undefined,
    mustChangePassword: o.mustChangePassword === true,
  };
}

export const session = {
  me: async () => normaliseMe(await get<unknown>('/api/auth/me')),
  login: async (name: string, password: string) => normaliseMe(await post<unknown>('/api/auth/login', { name, password })),
  logout: () => post<unknown>('/api/auth/logout'),
};
