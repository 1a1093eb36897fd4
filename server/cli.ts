/**
 * Tideline command line: `npm run tideline -- <command> [flags]`.
 *
 *   serve                         start the server (config: file, TIDELINE_* environment, flags)
 *   unit add ID [--kind dryer|reactor|other] [--name TEXT]
 *   analyzer add ID [--name TEXT] create an analyzer and print its token (shown once)
 *   migrate                       apply storage migrations and exit
 *   config                        print the effective configuration
 *   (security commands: user …, token …, audit … — see docs/security.md)
 *   import … | export …           historical batches in and out (server/transfer/cli.ts)
 *   lab add … | lab import … | lab list …  lab results after a batch (server/transfer/lab-cli.ts)
 *
 * Flags set configuration values by name: --port 0 --data-dir ./data --ingest.stale-after-ms 5000
 * --config tideline.json. Run with --help for this text.
 */
import { join } from 'node:path';
import { ConfigError, ENV_VARS, loadConfig } from './config.ts';
import { SqliteStorage } from './storage/sqlite-storage.ts';
import { createAnalyzerToken } from './ingest/analyzer-tokens.ts';
import { StartupError } from './startup-error.ts';

const HELP = `usage: npm run tideline -- <command> [--flag value …]

commands:
  serve                              start the server
  unit add ID [--kind K] [--name N]  create a unit (K: dryer, reactor, other)
  analyzer add ID [--name N]         create an analyzer and print its token (shown once)
  migrate                            apply storage migrations and exit
  config                             print the effective configuration
  user … | token … | audit …         access control and audit trail (docs/security.md)
  import --unit U --product P FILE|DIR …  import historical batches, CSV or JCAMP-DX, in one transaction
         [--delimiter , | ; | tab] [--decimal . | ,] [--axis-unit nm|cm-1] [--origin TIME] [--by NAME]
  export BATCH --format csv|jcamp [--out FILE]  a batch's raw spectra and lab values (reports: GET /api/batches/ID/report.pdf)
  lab add BATCH --property P --value X --unit U --at TIME [--method M] [--supersedes ID --reason R] [--by NAME]
                                     attach a lab result to the spectrum nearest its sample time (audited, never overwriting)
  lab import FILE.csv [--by NAME]    attach a lab results file (batch, sample time, property columns), all or nothing
  lab list BATCH                     a batch's lab values, corrections marked

configuration flags (override file and environment):
  --config FILE  --host H  --port P (0 = free port)  --data-dir DIR  --web-dir DIR|none
  --synchronous FULL|NORMAL  --log-level L  --ingest.stale-after-ms MS  --ingest.group-commit-ms MS

environment: ${Object.keys(ENV_VARS).join(', ')}
`;

function parseFlags(args: string[]): { positional: string[]; flags: Record<string, string> } {
  const positional: string[] = [];
  const flags: Record<string, string> = {};
  for (let i = 0; i < args.length; i++) {
    const a = args[i]!;
    if (a.startsWith('--')) {
      const eq = a.indexOf('=');
      if (eq > 0) flags[a.slice(2, eq)] = a.slice(eq + 1);
      else {
        const v = args[i + 1];
        if (v === undefined || v.startsWith('--')) throw new ConfigError(`flag ${a} needs a value`);
        flags[a.slice(2)] = v;
        i++;
      }
    } else positional.push(a);
  }
  return { positional, flags };
}

async function main(argv: string[]): Promise<number> {
  if (argv.length === 0 || argv.includes('--help') || argv.includes('-h')) {
    process.stdout.write(HELP);
    return argv.length === 0 ? 1 : 0;
  }
  const [cmd] = argv;
  if (cmd === 'user' || cmd === 'token' || cmd === 'audit') {
    const sec = await import('./auth/index.ts');
    // --config and --data-dir choose the database; everything else goes to the security commands.
    const own: Record<string, string> = {};
    const rest: string[] = [];
    for (let i = 0; i < argv.length; i++) {
      const a = argv[i]!;
      if ((a === '--config' || a === '--data-dir') && argv[i + 1] !== undefined) {
        own[a === '--config' ? 'config' : 'dataDir'] = argv[++i]!;
      } else rest.push(a);
    }
    const config = loadConfig({ env: process.env, flags: own });
    const storage = new SqliteStorage({ file: join(config.dataDir, 'tideline.db') });
    try {
      return await sec.runSecurityCli(rest, { db: storage.db, config });
    } finally {
      await storage.close();
    }
  }
  if (cmd === 'import' || cmd === 'export') {
    const { positional, flags } = parseFlags(argv.slice(1));
    const own: Record<string, string> = {};
    for (const k of ['config', 'data-dir']) if (k in flags) ((own[k === 'config' ? 'config' : 'dataDir'] = flags[k]!), delete flags[k]);
    const config = loadConfig({ env: process.env, flags: own });
    const storage = new SqliteStorage({ file: join(config.dataDir, 'tideline.db') });
    try {
      const { runTransferCli } = await import('./transfer/cli.ts');
      return await runTransferCli(cmd, positional, flags, storage, (s) => process.stdout.write(s));
    } finally {
      await storage.close();
    }
  }
  if (cmd === 'lab') {
    const { positional, flags } = parseFlags(argv.slice(1));
    const own: Record<string, string> = {};
    for (const k of ['config', 'data-dir']) if (k in flags) ((own[k === 'config' ? 'config' : 'dataDir'] = flags[k]!), delete flags[k]);
    const config = loadConfig({ env: process.env, flags: own });
    const storage = new SqliteStorage({ file: join(config.dataDir, 'tideline.db') });
    try {
      const { runLabCli } = await import('./transfer/lab-cli.ts');
      return await runLabCli(positional, flags, storage, config, (s) => process.stdout.write(s));
    } finally {
      await storage.close();
    }
  }
  const { positional, flags } = parseFlags(argv.slice(1));
  const extra: Record<string, string> = {};
  for (const k of ['kind', 'name']) if (k in flags) ((extra[k] = flags[k]!), delete flags[k]);
  const config = loadConfig({ env: process.env, flags: Object.fromEntries(Object.entries(flags).map(([k, v]) => [k.replace(/-([a-z])/g, (_, c: string) => c.toUpperCase()), v])) });
  switch (cmd) {
    case 'serve': {
      // The server must not crash on what a peer sends; anything that slips through is logged.
      process.on('unhandledRejection', (e) => process.stderr.write(`tideline: unhandled rejection: ${(e as Error)?.stack ?? e}\n`));
      // The dashboard is built on first serve and whenever its sources changed (server/web-dashboard.ts).
      if (config.webDir) {
        const { ensureDashboard } = await import('./web-dashboard.ts');
        const r = await ensureDashboard(config.webDir, (line) => process.stdout.write(`${line}\n`));
        process.stdout.write(`${r.note}\n`);
      }
      // Loaded here, not at the top: the server pulls in every channel (OPC UA, MQTT, …), which
      // the other commands do not need and which would slow each of them by seconds.
      const { startServer } = await import('./app.ts');
      const s = await startServer(config);
      process.stdout.write(`Tideline is running at ${s.url}/  (Ctrl-C stops it)\n`);
      const signal = await new Promise<string>((res) => {
        process.once('SIGINT', () => res('SIGINT'));
        process.once('SIGTERM', () => res('SIGTERM'));
      });
      // Shutdown is bounded: a signal channel waiting on a broker or receiver that is gone must not
      // keep the process alive. Every acked spectrum is already committed; an event whose delivery
      // is cut short is sent again after the restart (the channel's cursor had not moved).
      const limit = config.shutdownTimeoutMs;
      const deadline = setTimeout(() => {
        process.stderr.write(`tideline: shutdown after ${signal} did not finish within ${limit} ms (setting shutdownTimeoutMs); exiting now\n`);
        process.exit(1);
      }, limit);
      const again = () => {
        process.stderr.write('tideline: second stop signal; exiting now\n');
        process.exit(1);
      };
      process.once('SIGINT', again);
      process.once('SIGTERM', again);
      await s.close();
      clearTimeout(deadline);
      return 0;
    }
    case 'migrate': {
      const st = new SqliteStorage({ file: join(config.dataDir, 'tideline.db') });
      await st.close();
      process.stdout.write(`migrations applied to ${join(config.dataDir, 'tideline.db')}\n`);
      return 0;
    }
    case 'config':
      process.stdout.write(JSON.stringify(config, null, 2) + '\n');
      return 0;
    case 'unit':
    case 'analyzer': {
      const [sub, id] = positional;
      if (sub !== 'add' || !id) throw new ConfigError(`usage: ${cmd} add ID`);
      const st = new SqliteStorage({ file: join(config.dataDir, 'tideline.db') });
      try {
        if (cmd === 'unit') {
          const kind = (extra.kind ?? 'other') as 'dryer' | 'reactor' | 'other';
          if (!['dryer', 'reactor', 'other'].includes(kind)) throw new ConfigError(`--kind must be dryer, reactor or other, got "${kind}"`);
          if (await st.getUnit(id)) throw new ConfigError(`unit "${id}" already exists`);
          await st.createUnit({ id, name: extra.name ?? id, kind, description: '', createdAt: Date.now() });
          process.stdout.write(`unit ${id} created\n`);
        } else {
          if (await st.getAnalyzer(id)) throw new ConfigError(`analyzer "${id}" already exists; issue another token with: token add ${id}`);
          await st.createAnalyzer({ id, name: extra.name ?? id, createdAt: Date.now() });
          const token = await createAnalyzerToken(st, id, Date.now());
          process.stdout.write(`analyzer ${id} created; its token (shown once, store it in the analyzer's configuration):\n${token}\n`);
        }
      } finally {
        await st.close();
      }
      return 0;
    }
    default:
      throw new ConfigError(`unknown command "${cmd}"; run with --help`);
  }
}

main(process.argv.slice(2)).then(
  (code) => process.exit(code),
  (e) => {
    process.stderr.write(e instanceof StartupError ? `tideline: ${e.message}\n` : `tideline: ${(e as Error).stack ?? e}\n`);
    process.exit(2);
  },
);
