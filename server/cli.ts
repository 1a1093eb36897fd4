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
 *   model transfer VERSION …      carry a version over to a new analyzer (server/models/transfer-cli.ts)
 *
 * Flags set configuration values by name: --port 0 --data-dir ./data --ingest.stale-after-ms 5000
 * --config tideline.json. Run with --help for this text.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { userInfo } from 'node:os';
import { ConfigError, configSchema, ENV_VARS, loadConfig, redactConfig } from './config.ts';
import { SqliteStorage } from './storage/sqlite-storage.ts';
import { AnalyzerTokenStore } from './auth/analyzer-tokens.ts';
import { ANALYZER_ID_RE } from './auth/analyzer-tokens.ts';
import { StartupError } from './startup-error.ts';
import { ChainedAuditTrail } from './audit/audit-trail.ts';
import { idProblem, textProblem } from '../core/io/names.ts';

/** Exit codes: 0 done; 1 a check failed (audit verify); 2 usage, configuration or start-up error; 3 import refused. */
export const EXIT = { ok: 0, checkFailed: 1, usage: 2, importRefused: 3 } as const;

const CONFIG_FLAGS = `configuration flags (override file and environment):
  --config FILE  --host H  --port P (0 = free port)  --data-dir DIR  --web-dir DIR|none
  --synchronous FULL|NORMAL  --log-level L  --ingest.stale-after-ms MS  --ingest.group-commit-ms MS
  (any setting of docs/configuration.md by its dotted name, e.g. --metrics.access off)`;

const HELP = `usage: npm run tideline -- <command> [--flag value …]

commands:
  serve                              start the server
  unit add ID [--kind K] [--name N]  create a unit (K: dryer, reactor, other)
  analyzer add ID [--name N]         create an analyzer and print its token (shown once)
  migrate                            apply storage migrations and exit
  config                             print the effective configuration (secrets hidden)
  user … | token … | audit …         access control and audit trail (docs/security.md)
  import --unit U --product P FILE|DIR …  import historical batches, CSV or JCAMP-DX, in one transaction
         [--delimiter , | ; | tab] [--decimal . | ,] [--axis-unit nm|cm-1] [--origin TIME] [--by NAME]
  export BATCH --format csv|jcamp [--out FILE]  a batch's raw spectra and lab values (reports: GET /api/batches/ID/report.pdf)
  lab add BATCH --property P --value X --unit U --at TIME [--method M] [--supersedes ID --reason R] [--by NAME]
                                     attach a lab result to the spectrum nearest its sample time (audited, never overwriting)
  lab import FILE.csv [--by NAME]    attach a lab results file (batch, sample time, property columns), all or nothing
  lab list BATCH                     a batch's lab values, corrections marked
  model transfer VERSION --method ds|pds [--window W] --fit OLD=NEW[,…] --held-out OLD=NEW[,…] [--by NAME]
                                     carry a version over to a new analyzer (calibration transfer, docs/calibration-transfer.md)

  <command> --help                   that command's options

${CONFIG_FLAGS}

exit codes: 0 done, 1 a check failed (audit verify), 2 usage, configuration or start-up error,
3 import refused (nothing imported)

environment: ${Object.keys(ENV_VARS).join(', ')}
`;

/** Each command's own usage and the flags it takes besides the configuration flags. */
const COMMANDS: Record<string, { usage: string; own: string[]; config: 'all' | 'database' }> = {
  serve: { usage: 'serve [configuration flags]\n  start the server; stops cleanly on SIGINT/SIGTERM', own: [], config: 'all' },
  unit: { usage: 'unit add ID [--kind dryer|reactor|other] [--name TEXT] [--data-dir DIR | --config FILE]\n  ID: 1–128 letters, digits or . _ : -; TEXT: one line, at most 200 characters', own: ['kind', 'name'], config: 'database' },
  analyzer: { usage: 'analyzer add ID [--name TEXT] [--data-dir DIR | --config FILE]\n  ID: 1–64 letters, digits or . _ : -, starting with a letter or digit; prints the token once', own: ['name'], config: 'database' },
  migrate: { usage: 'migrate [--data-dir DIR | --config FILE]\n  apply storage migrations and exit', own: [], config: 'database' },
  config: { usage: 'config [configuration flags]\n  print the effective configuration; passwords, secrets and tokens are shown as "(hidden)"', own: [], config: 'all' },
  import: {
    usage: 'import --unit U --product P [--by NAME] [--delimiter , | ; | tab] [--decimal . | ,] [--axis-unit nm|cm-1] [--origin TIME] [--data-dir DIR | --config FILE] FILE|DIR …\n  one transaction: a refused file imports nothing (exit 3)',
    own: ['unit', 'product', 'by', 'delimiter', 'decimal', 'axis-unit', 'origin'],
    config: 'database',
  },
  export: { usage: 'export BATCH [--format csv|jcamp] [--out FILE] [--data-dir DIR | --config FILE]', own: ['format', 'out'], config: 'database' },
  lab: {
    usage:
      'lab add BATCH --property P --value X --unit U (--at TIME | --elapsed-min M) [--method M] [--supersedes ID --reason R] [--by NAME]\n' +
      '  | lab import FILE.csv [--delimiter , | ; | tab] [--decimal . | ,] [--by NAME] | lab list BATCH   [--data-dir DIR | --config FILE]',
    own: ['property', 'value', 'unit', 'at', 'elapsed-min', 'method', 'supersedes', 'reason', 'by', 'delimiter', 'decimal'],
    config: 'database',
  },
  model: {
    usage:
      'model transfer VERSION --method ds|pds [--window W] --fit OLD=NEW[,OLD=NEW…] --held-out OLD=NEW[,…] [--rcond X] [--max-rank N] [--by NAME] [--data-dir DIR | --config FILE]\n' +
      '  a new draft version carrying a calibration transfer onto a new analyzer; refused (exit 3) with nothing stored',
    own: ['method', 'window', 'fit', 'held-out', 'rcond', 'max-rank', 'by'],
    config: 'database',
  },
};

class UsageError extends ConfigError {
  override name = 'UsageError';
}

function parseFlags(args: string[]): { positional: string[]; flags: Record<string, string> } {
  const positional: string[] = [];
  const flags: Record<string, string> = {};
  for (let i = 0; i < args.length; i++) {
    const a = args[i]!;
    if (a.startsWith('--')) {
      const eq = a.indexOf('=');
      const name = eq > 0 ? a.slice(2, eq) : a.slice(2);
      if (name === '') throw new UsageError(`"${a}" is not a flag`);
      if (name in flags) throw new UsageError(`flag --${name} is given twice`);
      if (eq > 0) flags[name] = a.slice(eq + 1);
      else {
        const v = args[i + 1];
        if (v === undefined || v.startsWith('--')) throw new UsageError(`flag ${a} needs a value`);
        flags[name] = v;
        i++;
      }
    } else if (a.startsWith('-') && a.length > 1 && !/^-\d/.test(a)) throw new UsageError(`unknown option "${a}" (flags are written --name value)`);
    else positional.push(a);
  }
  return { positional, flags };
}

const camel = (k: string) => k.replace(/-([a-z])/g, (_, c: string) => c.toUpperCase());

/** Split a command's flags into its own and configuration flags; an unknown flag is a usage error. */
function splitFlags(cmd: string, flags: Record<string, string>): { own: Record<string, string>; config: Record<string, string> } {
  const spec = COMMANDS[cmd]!;
  const own: Record<string, string> = {};
  const config: Record<string, string> = {};
  const topKeys = new Set(Object.keys(configSchema.shape));
  for (const [k, v] of Object.entries(flags)) {
    if (spec.own.includes(k)) own[k] = v;
    else if (k === 'config' || k === 'data-dir' || k === 'dataDir') config[k === 'config' ? 'config' : 'dataDir'] = v;
    else if (spec.config === 'all' && topKeys.has(camel(k).split('.')[0]!)) config[k] = v;
    else throw new UsageError(`${cmd}: unknown flag --${k}\nusage: ${spec.usage}`);
  }
  return { own, config };
}

function cliActor(): string {
  try {
    return `cli:${userInfo().username}`;
  } catch {
    return 'cli:unknown';
  }
}

async function main(argv: string[]): Promise<number> {
  if (argv.length === 0) {
    process.stderr.write(HELP);
    return EXIT.usage;
  }
  const [cmd] = argv;
  if (cmd === '--help' || cmd === '-h' || cmd === 'help') {
    process.stdout.write(HELP);
    return EXIT.ok;
  }
  if (cmd === 'user' || cmd === 'token' || cmd === 'audit') {
    const sec = await import('./auth/index.ts');
    // --config and --data-dir choose the database; everything else goes to the security commands.
    const own: Record<string, string> = {};
    const rest: string[] = [];
    for (let i = 0; i < argv.length; i++) {
      const a = argv[i]!;
      if (a === '--config' || a === '--data-dir') {
        if (argv[i + 1] === undefined || argv[i + 1]!.startsWith('--')) throw new UsageError(`flag ${a} needs a value`);
        own[a === '--config' ? 'config' : 'dataDir'] = argv[++i]!;
      } else rest.push(a);
    }
    const config = loadConfig({ env: process.env, flags: own });
    const storage = new SqliteStorage({ file: join(config.dataDir, 'tideline.db') });
    try {
      return await sec.runSecurityCli(rest, { storage, config });
    } finally {
      await storage.close();
    }
  }
  const spec = COMMANDS[cmd!];
  if (!spec) throw new UsageError(`unknown command "${cmd}"; run with --help for the list`);
  if (argv.includes('--help') || argv.includes('-h')) {
    process.stdout.write(`usage: npm run tideline -- ${spec.usage}\n${spec.config === 'all' ? `\n${CONFIG_FLAGS}\n` : ''}`);
    return EXIT.ok;
  }
  const { positional, flags } = parseFlags(argv.slice(1));
  const { own, config: configFlags } = splitFlags(cmd!, flags);
  const config = loadConfig({ env: process.env, flags: configFlags });
  const dbFile = join(config.dataDir, 'tideline.db');
  const noPositional = () => {
    if (positional.length) throw new UsageError(`${cmd}: unexpected argument "${positional[0]}"\nusage: ${spec.usage}`);
  };
  if (cmd === 'lab') {
    const storage = new SqliteStorage({ file: dbFile });
    try {
      const { runLabCli } = await import('./transfer/lab-cli.ts');
      return await runLabCli(positional, own, storage, config, (s) => process.stdout.write(s));
    } finally {
      await storage.close();
    }
  }
  if (cmd === 'model') {
    const storage = new SqliteStorage({ file: dbFile });
    try {
      const { runModelCli } = await import('./models/transfer-cli.ts');
      return await runModelCli(positional, own, storage, (s) => process.stdout.write(s));
    } finally {
      await storage.close();
    }
  }
  if (cmd === 'import' || cmd === 'export') {
    const storage = new SqliteStorage({ file: dbFile });
    try {
      const { runTransferCli } = await import('./transfer/cli.ts');
      const audit = new ChainedAuditTrail(storage);
      return await runTransferCli(cmd, positional, own, storage, (s) => process.stdout.write(s), { audit, actor: cliActor() });
    } finally {
      await storage.close();
    }
  }
  switch (cmd) {
    case 'serve': {
      noPositional();
      // The server must not crash on what a peer sends; anything that slips through is logged.
      process.on('unhandledRejection', (e) => process.stderr.write(`tideline: unhandled rejection: ${(e as Error)?.stack ?? e}\n`));
      // The dashboard is built on first serve and whenever its sources changed (server/web-dashboard.ts).
      if (config.webDir) {
        const { ensureDashboard } = await import('./web-dashboard.ts');
        const r = await ensureDashboard(config.webDir, (line) => process.stdout.write(`${line}\n`));
        process.stdout.write(`${r.note}\n`);
      }
      // Secrets in files readable by others are named at every start (server/secret-files.ts).
      const configFile = configFlags.config ?? process.env.TIDELINE_CONFIG;
      const { secretFileWarnings } = await import('./secret-files.ts');
      for (const w of secretFileWarnings({ configFile, configJson: configFile ? JSON.parse(readFileSync(configFile, 'utf8')) : undefined, tlsKey: config.tls?.key ?? null })) {
        process.stderr.write(`tideline: warning: ${w}\n`);
      }
      // Loaded here, not at the top: the server pulls in every channel (OPC UA, MQTT, …), which
      // the other commands do not need and which would slow each of them by seconds.
      const { startServer } = await import('./app.ts');
      const s = await startServer(config);
      // The stop handlers go in before the line that says the server runs: a supervisor that reads
      // that line and stops the server at once must find them there (the child can be preempted
      // between the write and the next statement, and SIGTERM's default action kills it unclean).
      const stopSignal = new Promise<string>((res) => {
        process.once('SIGINT', () => res('SIGINT'));
        process.once('SIGTERM', () => res('SIGTERM'));
      });
      process.stdout.write(`Tideline is running at ${s.url}/  (Ctrl-C stops it)\n`);
      const signal = await stopSignal;
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
      return EXIT.ok;
    }
    case 'migrate': {
      noPositional();
      const st = new SqliteStorage({ file: dbFile });
      await st.close();
      process.stdout.write(`migrations applied to ${dbFile}\n`);
      return EXIT.ok;
    }
    case 'config':
      noPositional();
      process.stdout.write(JSON.stringify(redactConfig(config), null, 2) + '\n');
      return EXIT.ok;
    case 'unit':
    case 'analyzer': {
      const [sub, id, ...more] = positional;
      if (sub !== 'add') throw new UsageError(`${cmd}: ${sub === undefined ? 'missing sub-command' : `unknown sub-command "${sub}"`}\nusage: ${spec.usage}`);
      if (id === undefined) throw new UsageError(`${cmd} add: the ${cmd} id is missing\nusage: ${spec.usage}`);
      if (more.length) throw new UsageError(`${cmd} add: unexpected argument "${more[0]}" (a name with spaces goes in quotes after --name)\nusage: ${spec.usage}`);
      const idP = cmd === 'unit' ? idProblem(id) : ANALYZER_ID_RE.test(id) ? null : idProblem(id, 64) ?? 'must start with a letter or digit';
      if (idP) throw new UsageError(`${cmd} add: the ${cmd} id ${JSON.stringify(id)} ${idP}`);
      if (own.name !== undefined) {
        const p = textProblem(own.name);
        if (p) throw new UsageError(`${cmd} add: --name ${p}`);
      }
      const kind = own.kind ?? 'other';
      if (cmd === 'unit' && !['dryer', 'reactor', 'other'].includes(kind)) throw new UsageError(`unit add: --kind must be dryer, reactor or other, got "${kind}"`);
      const st = new SqliteStorage({ file: dbFile });
      try {
        const audit = new ChainedAuditTrail(st);
        const actor = cliActor();
        if (cmd === 'unit') {
          if (await st.getUnit(id)) throw new UsageError(`unit "${id}" already exists`);
          const row = { id, name: own.name ?? id, kind: kind as 'dryer' | 'reactor' | 'other', description: '', createdAt: Date.now() };
          await st.createUnit(row);
          // Audited as its REST equivalent is (unit.create), by the operating-system user.
          await audit.record({ user: actor, action: 'unit.create', object: `unit:${id}`, after: row });
          process.stdout.write(`unit ${id} created (a running server picks it up within a few seconds)\n`);
        } else {
          if (await st.getAnalyzer(id)) throw new UsageError(`analyzer "${id}" already exists; issue another token with: token add ${id}`);
          await st.createAnalyzer({ id, name: own.name ?? id, createdAt: Date.now() });
          const { id: tokenId, token } = await new AnalyzerTokenStore(st.analyzerTokens, Date.now).create(id, '(issued with the analyzer)', actor);
          await audit.record({ user: actor, action: 'analyzer.create', object: `analyzer:${id}`, after: { id, name: own.name ?? id, tokenIssued: true, tokenId } });
          process.stdout.write(`analyzer ${id} created; its token (shown once, store it in the analyzer's configuration):\n${token}\n`);
        }
      } finally {
        await st.close();
      }
      return EXIT.ok;
    }
    default:
      throw new UsageError(`unknown command "${cmd}"; run with --help`);
  }
}

main(process.argv.slice(2)).then(
  (code) => process.exit(code),
  (e) => {
    process.stderr.write(e instanceof StartupError ? `tideline: ${e.message}\n` : `tideline: ${(e as Error).stack ?? e}\n`);
    process.exit(2);
  },
);
