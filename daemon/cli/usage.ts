/** A command-line usage problem (missing or conflicting options): exit code 2, no stack trace. */
export class UsageError extends Error {
  readonly code = 'USAGE';
}
