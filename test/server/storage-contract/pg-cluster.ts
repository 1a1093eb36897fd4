/**
 * A throwaway PostgreSQL cluster for tests: initdb into a temporary folder, a server on a free
 * loopback port (no TCP listener elsewhere, its Unix socket in the same folder), stopped and
 * removed at the end. Run as the `postgres` OS user when the tests run as root (PostgreSQL refuses
 * to run as root). `findPostgres()` is null where PostgreSQL is not installed: the tests that need
 * it then say they skipped.
 */
import { execFileSync } from 'node:child_process';
import { chmodSync, chownSync, existsSync, mkdtempSync, readdirSync, realpathSync, rmSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';

/**
 * The folder holding initdb, pg_ctl and postgres (and the other server programs): PATH first (links
 * followed to the real folder), then Debian's /usr/lib/postgresql/<version>/bin (newest).
 */
export function findPostgres(): string | null {
  const has = (dir: string) => ['initdb', 'pg_ctl', 'postgres'].every((b) => existsSync(join(dir, b)));
  for (const dir of (process.env.PATH ?? '').split(':')) if (dir && has(dir)) return dirname(realpathSync(join(dir, 'initdb')));
  const root = '/usr/lib/postgresql';
  if (existsSync(root)) {
    const versions = readdirSync(root).filter((v) => /^\d+$/.test(v)).sort((a, b) => Number(b) - Number(a));
    for (const v of versions) if (has(join(root, v, 'bin'))) return join(root, v, 'bin');
  }
  return null;
}

function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const s = createServer();
    s.once('error', reject);
    s.listen(0, '127.0.0.1', () => {
      const port = (s.address() as { port: number }).port;
      s.close(() => resolve(port));
    });
  });
}

export interface PgCluster {
  readonly port: number;
  /** A connection URL for a database of this cluster (superuser `tideline`, trust on loopback). */
  url(database?: string): string;
  /** Run a program of the PostgreSQL bin folder as the cluster's OS user (for standbys, backups). */
  run(program: string, args: string[]): string;
  readonly dir: string;
  stop(): Promise<void>;
}

export interface ClusterOptions {
  /** Extra server settings (postgresql.conf names). */
  settings?: Record<string, string>;
  /** An existing data folder to start (a standby made by pg_basebackup) instead of running initdb. */
  dataDir?: string;
}

/** Start a cluster; throws when PostgreSQL is absent (check findPostgres() first). */
export async function startCluster(opts: ClusterOptions = {}): Promise<PgCluster> {
  const bin = findPostgres();
  if (!bin) throw new Error('PostgreSQL is not installed (no initdb/pg_ctl/postgres on PATH or in /usr/lib/postgresql/*/bin)');
  const asRoot = process.getuid?.() === 0;
  const dir = mkdtempSync(join(tmpdir(), 'tideline-pg-'));
  let uid = -1;
  let gid = -1;
  if (asRoot) {
    uid = Number(execFileSync('id', ['-u', 'postgres'], { encoding: 'utf8' }).trim());
    gid = Number(execFileSync('id', ['-g', 'postgres'], { encoding: 'utf8' }).trim());
    chownSync(dir, uid, gid);
  }
  chmodSync(dir, 0o700);
  const run = (program: string, args: string[]): string => {
    const file = join(bin, program);
    const [cmd, argv] = asRoot ? ['runuser', ['-u', 'postgres', '--', file, ...args]] : [file, args];
    return execFileSync(cmd, argv, { encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'], cwd: dir });
  };
  const data = opts.dataDir ?? join(dir, 'data');
  if (!opts.dataDir) run('initdb', ['-D', data, '-U', 'tideline', '--auth=trust', '-E', 'UTF8', '--locale=C', '--no-sync']);
  let port = 0;
  for (let attempt = 0; ; attempt++) {
    port = await freePort();
    const settings: Record<string, string> = {
      port: String(port), listen_addresses: '127.0.0.1', unix_socket_directories: dir, max_connections: '40', shared_buffers: '16MB', ...opts.settings,
    };
    const o = Object.entries(settings).map(([k, v]) => `-c ${k}=${v}`).join(' ');
    try {
      run('pg_ctl', ['start', '-w', '-t', '60', '-D', data, '-l', join(dir, 'server.log'), '-o', o]);
      break;
    } catch (e) {
      // The port may have been taken between the probe and the start: try another a few times.
      if (attempt >= 3) throw new Error(`PostgreSQL did not start in ${dir}: ${(e as { stderr?: string }).stderr ?? e}`);
    }
  }
  return {
    port,
    dir,
    run,
    url: (database = 'postgres') => `postgres://tideline@127.0.0.1:${port}/${database}`,
    stop: async () => {
      try {
        // A server a test stopped itself (pg_ctl stop -m immediate) has no postmaster.pid left.
        if (existsSync(join(data, 'postmaster.pid'))) run('pg_ctl', ['stop', '-w', '-m', 'fast', '-D', data]);
      } finally {
        rmSync(dir, { recursive: true, force: true });
        if (opts.dataDir) rmSync(opts.dataDir, { recursive: true, force: true });
      }
    },
  };
}
