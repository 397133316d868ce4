/**
 * Log lines of the long-running commands (serve, watch): an ISO 8601 time, a level, the text.
 * Warnings and errors go to standard error, the rest to standard output. `--quiet` keeps notices
 * (the page's address, runs starting and ending) and above; `--verbose` adds one line per journal
 * event worth reading (fits, drift, decisions, output changes).
 */
export type LogLevel = 'debug' | 'info' | 'notice' | 'warn' | 'error';

const RANK: Record<LogLevel, number> = { debug: 0, info: 1, notice: 2, warn: 3, error: 4 };

export class Log {
  constructor(readonly threshold: LogLevel = 'info') {}

  /** The threshold the --quiet / --verbose options ask for. */
  static from(o: { quiet?: boolean; verbose?: boolean }): Log {
    return new Log(o.verbose ? 'debug' : o.quiet ? 'notice' : 'info');
  }

  write(level: LogLevel, text: string): void {
    if (RANK[level] < RANK[this.threshold]) return;
    const line = `${new Date().toISOString()} ${level.toUpperCase().padEnd(6)} ${text}\n`;
    (RANK[level] >= RANK.warn ? process.stderr : process.stdout).write(line);
  }

  debug(text: string): void {
    this.write('debug', text);
  }
  info(text: string): void {
    this.write('info', text);
  }
  notice(text: string): void {
    this.write('notice', text);
  }
  warn(text: string): void {
    this.write('warn', text);
  }
  error(text: string): void {
    this.write('error', text);
  }
}
