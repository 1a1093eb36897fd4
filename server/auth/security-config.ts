/**
 * Configuration of access control and TLS. The server's config schema includes them as
 * `auth: authConfigSchema` and `tls: tlsConfigSchema` (see docs/security.md); absent → defaults.
 */
import { z } from 'zod';

export const authConfigSchema = z
  .object({
    /** log2 of the scrypt cost N for new password hashes (OWASP minimum: 17). */
    scryptLog2N: z.number().int().min(10).max(20).default(17),
    /** A session ends after this long without a request… */
    sessionIdleMinutes: z.number().min(1).max(7 * 24 * 60).default(8 * 60),
    /** …and at the latest this long after login. */
    sessionMaxHours: z.number().min(0.1).max(30 * 24).default(12),
    /** Failed logins per user name before backoff starts. */
    userFreeFailures: z.number().int().min(1).max(100).default(5),
    /** Failed logins per client address before backoff starts. */
    addressFreeFailures: z.number().int().min(1).max(10000).default(20),
    /** First lock, ms; doubles with each further failure. */
    lockBaseMs: z.number().int().min(100).max(3_600_000).default(2000),
    /** Longest lock, ms. */
    lockMaxMs: z.number().int().min(1000).max(86_400_000).default(15 * 60_000),
  })
  .strict()
  .prefault({});

export const tlsConfigSchema = z
  .object({
    /** PEM certificate (chain) file. */
    cert: z.string().min(1),
    /** PEM private key file. */
    key: z.string().min(1),
    /** Optional PEM CA bundle (for a private CA chain). */
    ca: z.string().min(1).optional(),
    /** Passphrase of an encrypted key, if any. Prefer an unencrypted key readable only by the service user. */
    passphrase: z.string().optional(),
  })
  .strict()
  .nullable()
  .default(null);

export type AuthConfig = z.infer<typeof authConfigSchema>;
export type TlsConfig = NonNullable<z.infer<typeof tlsConfigSchema>>;

/** Read `auth` and `tls` from a server config object that may or may not declare them. */
export function readSecurityConfig(config: unknown): { auth: AuthConfig; tls: TlsConfig | null } {
  const c = (config && typeof config === 'object' ? config : {}) as Record<string, unknown>;
  const a = authConfigSchema.safeParse(c.auth);
  if (!a.success) throw new Error('configuration auth: ' + a.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('; '));
  const t = tlsConfigSchema.safeParse(c.tls);
  if (!t.success) throw new Error('configuration tls: ' + t.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('; '));
  return { auth: a.data, tls: t.data };
}
