/** Minimal levelled logger writing one line per event to stderr. */
export type LogLevel = 'silent' | 'error' | 'warn' | 'info' | 'debug';
const ORDER: LogLevel[] = ['silent', 'error', 'warn', 'info', 'debug'];

export interface Logger {
  error(msg: string, extra?: unknown): void;
  warn(msg: string, extra?: unknown): void;
  info(msg: string, extra?: unknown): void;
  debug(msg: string, extra?: unknown): void;
}

export function createLogger(level: LogLevel): Logger {
  const lim = ORDER.indexOf(level);
  const out = (l: LogLevel) => (msg: string, extra?: unknown) => {
    if (ORDER.indexOf(l) > lim || lim === 0) return;
    const tail = extra === undefined ? '' : ' ' + (extra instanceof Error ? extra.stack ?? extra.message : JSON.stringify(extra));
    process.stderr.write(`${new Date().toISOString()} ${l.padEnd(5)} ${msg}${tail}\n`);
  };
  return { error: out('error'), warn: out('warn'), info: out('info'), debug: out('debug') };
}
