/** A command-line usage problem (missing or conflicting options): exit code 2, no stack trace. */
export class UsageError extends Error {
  readonly code = 'USAGE';
}

/**
 * Errors that mean "your input or setting is wrong" (exit code 2), recognised by their code so the
 * CLI need not load the daemon's modules to test instanceof: config, plan, guard, journal, server
 * configuration, and station requests refused as bad (4xx).
 */
export function isInputError(e: unknown): e is Error {
  if (!(e instanceof Error)) return false;
  const code = (e as { code?: unknown }).code;
  if (typeof code === 'string' && ['BAD_CONFIG', 'BAD_PLAN', 'GUARD', 'JOURNAL', 'BAD_SCENARIO', 'BAD_DEVICE'].includes(code)) return true;
  const status = (e as { status?: unknown }).status;
  return e.name === 'StationError' || (typeof status === 'number' && status >= 400 && status < 500);
}
