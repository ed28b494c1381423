/**
 * Kafka broker for the slow tests: one real broker per test file (see src/devtools/kafka-broker.ts for how
 * it is obtained). Without Java, Docker or MODEWATCH_KAFKA_BROKERS the tests skip and print why;
 * under CI=true they fail instead, so a CI run can never pass without having talked to Kafka.
 */
import { afterAll, beforeAll, type TestContext } from 'vitest';
import { startBroker, type BrokerHandle } from '../../src/devtools/kafka-broker.js';

export { startBroker, freePort, type BrokerHandle } from '../../src/devtools/kafka-broker.js';

export interface SharedBroker {
  /** The running broker; skips the calling test (or throws under CI) when none could be started. */
  get(ctx: TestContext): BrokerHandle;
  /** Milliseconds startBroker() took in this file (for the record). */
  startMs(): number;
}

/** Registers beforeAll/afterAll hooks that start one broker for the calling test file and stop it at the end. */
export function useSharedBroker(): SharedBroker {
  let handle: BrokerHandle | undefined;
  let reason = 'the broker was not started (beforeAll did not run)';
  let took = 0;
  beforeAll(async () => {
    const t0 = Date.now();
    try {
      handle = await startBroker({ log: (l) => console.info(`[kafka] ${l}`) });
      took = Date.now() - t0;
      console.info(`[kafka] ${handle.how}: ${handle.brokers.join(',')} in ${took} ms`);
    } catch (e) {
      reason = e instanceof Error ? e.message : String(e);
      if (process.env.CI === 'true') throw new Error(`CI=true and no Kafka broker: ${reason}`);
      console.warn(`[kafka] skipping Kafka tests: ${reason}`);
    }
  }, 180_000);
  afterAll(async () => {
    await handle?.stop();
  }, 60_000);
  return {
    get(ctx: TestContext): BrokerHandle {
      if (handle) return handle;
      if (process.env.CI === 'true') throw new Error(`CI=true and no Kafka broker: ${reason}`);
      return ctx.skip(`no Kafka broker: ${reason}`);
    },
    startMs: () => took,
  };
}
