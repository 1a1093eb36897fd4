/**
 * Command-line administration of users, analyzer tokens and the audit trail. The server's CLI
 * (server/cli.ts) hands these commands over:
 *
 *   npm run tideline -- user add --role administrator [--full-name "Ada Lovelace"] [--password-stdin] NAME
 *   npm run tideline -- user list | set-role NAME ROLE | disable NAME | enable NAME | reset-password [--password-stdin] NAME
 *   npm run tideline -- token add [--label TEXT] ANALYZER | token list | token revoke ID
 *   npm run tideline -- audit verify | audit export [--format csv|json] [--out FILE] [--from T] [--to T]
 *
 * Without --password-stdin a random password is generated and printed once, and the user must
 * change it (POST /api/auth/password). Every change is audited with the user `cli:<operating-system user>`.
 */
import { readFileSync, writeFileSync } from 'node:fs';
import { formatAnchor, parseAnchors } from '../audit/audit-trail.ts';
import type { AuditAnchor } from '../audit/types.ts';
import { userInfo } from 'node:os';
import { parseArgs } from 'node:util';
import { generatePassword } from './password.ts';
import { createSecurity, type SecurityStorage } from './security-setup.ts';
import { isRole, ROLES } from './types.ts';

export const SECURITY_COMMANDS = ['user', 'token', 'audit'] as const;

export interface CliIo {
  out: (s: string) => void;
  err: (s: string) => void;
  /** Reads all of stdin (for --password-stdin). */
  readStdin: () => Promise<string>;
}

const defaultIo: CliIo = {
  out: (s) => process.stdout.write(s + '\n'),
  err: (s) => process.stderr.write(s + '\n'),
  readStdin: async () => {
    const chunks: Buffer[] = [];
    for await (const c of process.stdin) chunks.push(c as Buffer);
    return Buffer.concat(chunks).toString('utf8');
  },
};

const USAGE = `usage:
  user add --role ${ROLES.join('|')} [--full-name NAME] [--password-stdin] USER
  user list
  user set-role USER ROLE
  user disable USER | user enable USER
  user reset-password [--password-stdin] USER
  token add [--label TEXT] ANALYZER
  token list
  token revoke ID
  audit verify [--anchor SEQ:HASH …] [--anchor-file FILE …]
  audit export [--format csv|json] [--out FILE] [--from TIME] [--to TIME]`;

function cliActor(): string {
  let u = 'unknown';
  try {
    u = userInfo().username;
  } catch {
    /* no passwd entry */
  }
  return `cli:${u}`;
}

/** Run one security command; returns the process exit code (0 ok, 1 failed check, 2 usage/input error). */
export async function runSecurityCli(
  argv: string[],
  host: { storage: SecurityStorage; config?: unknown; now?: () => number },
  io: CliIo = defaultIo,
): Promise<number> {
  const [group, verb, ...rest] = argv;
  const { audit, auth } = createSecurity(host.storage, host.config, host.now ?? Date.now);
  const actor = cliActor();
  let parsed;
  try {
    parsed = parseArgs({
      args: rest,
      allowPositionals: true,
      options: {
        role: { type: 'string' },
        'full-name': { type: 'string' },
        'password-stdin': { type: 'boolean' },
        label: { type: 'string' },
        format: { type: 'string' },
        out: { type: 'string' },
        from: { type: 'string' },
        to: { type: 'string' },
        anchor: { type: 'string', multiple: true },
        'anchor-file': { type: 'string', multiple: true },
      },
    });
  } catch (e) {
    io.err(`${(e as Error).message}\n${USAGE}`);
    return 2;
  }
  const { values: o, positionals: pos } = parsed;
  const need = (n: number, what: string): boolean => {
    if (pos.length !== n) {
      io.err(`${group} ${verb}: expected ${what}\n${USAGE}`);
      return false;
    }
    return true;
  };
  const readPassword = async (): Promise<{ password: string; generated: boolean }> =>
    o['password-stdin'] ? { password: (await io.readStdin()).replace(/\r?\n$/, ''), generated: false } : { password: generatePassword(20), generated: true };

  try {
    if (group === 'user' && verb === 'add') {
      if (!need(1, 'one user name')) return 2;
      if (!isRole(o.role)) {
        io.err(`user add: --role must be one of ${ROLES.join(', ')}`);
        return 2;
      }
      const pw = await readPassword();
      const u = await auth.createUser({ name: pos[0], fullName: o['full-name'], role: o.role, password: pw.password, mustChangePassword: pw.generated }, actor);
      io.out(`created user ${u.name} (${u.role})`);
      if (pw.generated) io.out(`password: ${pw.password}\n(shown once; the account is marked must-change-password: the user sets their own with POST /api/auth/password)`);
      return 0;
    }
    if (group === 'user' && verb === 'list') {
      for (const u of await auth.listUsers())
        io.out(`${u.name}\t${u.role}\t${u.fullName}\t${u.disabledAt ? 'disabled ' + u.disabledAt : 'active'}\tcreated ${u.createdAt} by ${u.createdBy}`);
      return 0;
    }
    if (group === 'user' && verb === 'set-role') {
      if (!need(2, 'USER ROLE')) return 2;
      if (!isRole(pos[1])) {
        io.err(`user set-role: role must be one of ${ROLES.join(', ')}`);
        return 2;
      }
      const u = await auth.updateUser(pos[0], { role: pos[1] }, actor);
      io.out(`${u.name} is now ${u.role}`);
      return 0;
    }
    if (group === 'user' && (verb === 'disable' || verb === 'enable')) {
      if (!need(1, 'one user name')) return 2;
      const u = await auth.updateUser(pos[0], { disabled: verb === 'disable' }, actor);
      io.out(`${u.name} ${u.disabledAt ? 'disabled' : 'enabled'}`);
      return 0;
    }
    if (group === 'user' && verb === 'reset-password') {
      if (!need(1, 'one user name')) return 2;
      const pw = await readPassword();
      await auth.updateUser(pos[0], { password: pw.password, mustChangePassword: true }, actor);
      io.out(`password of ${pos[0]} reset; the user must change it at next login`);
      if (pw.generated) io.out(`password: ${pw.password}`);
      return 0;
    }
    if (group === 'token' && verb === 'add') {
      if (!need(1, 'one analyzer id')) return 2;
      const t = await auth.createAnalyzerToken(pos[0], o.label ?? '', actor);
      io.out(`token ${t.id} for analyzer ${pos[0]}:\n${t.token}\n(shown once; the server keeps only its hash)`);
      return 0;
    }
    if (group === 'token' && verb === 'list') {
      for (const t of await auth.listAnalyzerTokens())
        io.out(`${t.id}\t${t.analyzer}\t${t.revokedAt ? 'revoked ' + t.revokedAt : 'active'}\tcreated ${t.createdAt}\t${t.label}`);
      return 0;
    }
    if (group === 'token' && verb === 'revoke') {
      if (!need(1, 'one token id')) return 2;
      if (!(await auth.revokeAnalyzerToken(pos[0], actor))) {
        io.err(`token revoke: no active token with id ${pos[0]}`);
        return 1;
      }
      io.out(`token ${pos[0]} revoked`);
      return 0;
    }
    if (group === 'audit' && verb === 'verify') {
      if (pos.length) {
        io.err(`audit verify: unexpected argument "${pos[0]}" (anchors go after --anchor)\n${USAGE}`);
        return 2;
      }
      const anchors: AuditAnchor[] = [];
      for (const a of o.anchor ?? []) anchors.push(...parseAnchors(a, '--anchor'));
      for (const f of o['anchor-file'] ?? []) {
        let text: string;
        try {
          text = readFileSync(f, 'utf8');
        } catch (e) {
          io.err(`audit verify: --anchor-file ${f}: cannot read it (${(e as Error).message})`);
          return 2;
        }
        anchors.push(...parseAnchors(text, `--anchor-file ${f}`));
      }
      const v = await audit.verify(anchors);
      if (v.ok && v.empty) {
        io.out(`audit trail empty: ${v.note ?? '0 records, nothing to verify'}`);
        return 0;
      }
      if (v.ok) {
        const head = await audit.anchor();
        io.out(`audit trail intact: ${v.count} records, head ${v.headSeq} ${v.headHash}` + (anchors.length ? `; matches ${anchors.length} anchor(s)` : ''));
        if (head) io.out(`anchor (keep it outside the server): ${formatAnchor(head)}`);
        if (anchors.length === 0) io.out('without --anchor, a trail cut back at its end or rewritten as a whole cannot be told from an intact one');
        return 0;
      }
      io.out(`audit trail BROKEN at record ${v.brokenSeq}: ${v.problem} (${v.count} records verified before it)`);
      return 1;
    }
    if (group === 'audit' && verb === 'export') {
      const format = o.format ?? 'json';
      if (format !== 'csv' && format !== 'json') {
        io.err('audit export: --format must be csv or json');
        return 2;
      }
      const f = { from: o.from, to: o.to };
      const text = format === 'csv' ? await audit.exportCsv(f) : await audit.exportJson(f);
      if (o.out) {
        writeFileSync(o.out, text);
        io.out(`wrote ${o.out}`);
      } else io.out(text);
      return 0;
    }
  } catch (e) {
    io.err(`${group} ${verb}: ${e instanceof Error ? e.message : String(e)}`);
    return 2;
  }
  io.err(USAGE);
  return 2;
}
