/**
 * Files that hold secrets must be readable by the service user only: the database (password and
 * token hashes, the audit trail), the TLS private key, and a configuration file that holds a
 * webhook secret, an MQTT password, a key passphrase or the metrics token. Tideline creates its
 * data folder 0700 and a new database 0600 (server/storage/sqlite-storage.ts); files the site
 * provides are checked at start and named in a warning with the command that fixes them.
 */
import { statSync } from 'node:fs';
import { SECRET_KEY_RE } from './config.ts';

/** null when `file` is not readable or writable by group or others (or does not exist / no POSIX modes), else the warning. */
export function looseModeWarning(file: string, what: string): string | null {
  if (process.platform === 'win32') return null;
  const st = statSync(file, { throwIfNoEntry: false });
  if (!st) return null;
  const loose = st.mode & 0o077;
  if (!loose) return null;
  const mode = (st.mode & 0o777).toString(8).padStart(4, '0');
  return `${what} ${file} can be read by ${st.mode & 0o007 ? 'every user of this machine' : 'its group'} (mode ${mode}); make it readable by the service user only: chmod 600 ${file}`;
}

/** Whether a parsed configuration value holds a secret (a non-empty string under a secret-looking key). */
export function holdsSecret(v: unknown, key = ''): boolean {
  if (typeof v === 'string') return v.length > 0 && SECRET_KEY_RE.test(key);
  if (Array.isArray(v)) return v.some((x) => holdsSecret(x, key));
  if (v && typeof v === 'object') return Object.entries(v).some(([k, x]) => holdsSecret(x, k));
  return false;
}

/** Warnings for the configuration file (when it holds secrets) and the TLS key. */
export function secretFileWarnings(opts: { configFile?: string; configJson?: unknown; tlsKey?: string | null }): string[] {
  const out: string[] = [];
  if (opts.configFile && holdsSecret(opts.configJson)) {
    const w = looseModeWarning(opts.configFile, 'the configuration file, which holds secrets,');
    if (w) out.push(w);
  }
  if (opts.tlsKey) {
    const w = looseModeWarning(opts.tlsKey, 'the TLS private key');
    if (w) out.push(w);
  }
  return out;
}
