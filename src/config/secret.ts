/**
 * A secret read from the environment or a file (SASL password, webhook token). The value sits in a private
 * field: JSON.stringify (and so pino), String() and util.inspect (console.log) all show "<redacted>"; only
 * reveal() gives it, at the one place that hands it to a client library.
 */
import { inspect } from 'node:util';

export const REDACTED = '<redacted>';

export class Secret {
  readonly #value: string;

  /** `source` says where it came from, for messages: `environment variable KAFKA_PASSWORD`, `file /run/secrets/x`. */
  constructor(
    value: string,
    readonly source: string,
  ) {
    this.#value = value;
  }

  reveal(): string {
    return this.#value;
  }

  toJSON(): string {
    return REDACTED;
  }

  toString(): string {
    return REDACTED;
  }

  [inspect.custom](): string {
    return `Secret(${REDACTED} from ${this.source})`;
  }
}
