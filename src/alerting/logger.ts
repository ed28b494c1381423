/**
 * The two logging shapes the alerting room needs. Both are satisfied by a pino logger,
 * so the CLI passes its own; nothing here writes to the console.
 */
export interface InfoLogger {
  info(obj: object, msg: string): void;
}

export interface WarnLogger {
  warn(obj: object, msg: string): void;
}

/** A logger that says nothing: the default where the caller gave none. */
export const silentLogger: InfoLogger & WarnLogger = {
  info() {},
  warn() {},
};
