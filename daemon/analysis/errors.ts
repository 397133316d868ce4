/** Coded errors raised by the analysis layer. The codes are stable and listed in DEVELOPERS.md. */
export type AnalysisErrorCode = 'TOO_FEW_POINTS' | 'DEGENERATE_X' | 'BAD_INPUT' | 'MISSING_INPUT' | 'UNKNOWN_MODEL' | 'BAD_EXPRESSION' | 'BAD_WINDOW';

export class AnalysisError extends Error {
  readonly code: AnalysisErrorCode;
  /** The setting or field the error is about, when there is one (e.g. "thickness"). */
  readonly field: string | undefined;
  constructor(code: AnalysisErrorCode, message: string, field?: string) {
    super(message);
    this.name = 'AnalysisError';
    this.code = code;
    this.field = field;
  }
}
