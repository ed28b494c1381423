/** An error the user can fix (a flag, a file, a config key): printed as its message alone, exit code 2. */
export class UsageError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'UsageError';
  }
}
