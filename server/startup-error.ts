/**
 * An error that stops the server or a command with one sentence for the person who started it
 * (naming the file and the setting concerned), printed without a stack trace by server/cli.ts.
 */
export class StartupError extends Error {
  override name = 'StartupError';
}
