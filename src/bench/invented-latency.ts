/**
 * The invented events of the Kafka and pipeline benchmarks: per stream a two-mode log-normal latency mixture
 * (fast ~40 ms with 80 %, slow ~180 ms with 20 %), one event every 5 ms, keyed svc-0 .. svc-(streams-1) in turn,
 * as the flat JSON message {"ts":<epoch ms>,"value":<ms>}.
 */
import type { Random } from '../math/random.js';

export const INVENTED_STREAMS = 10;
const T0 = Date.UTC(2026, 0, 1);

/** Event j's message key and value (text). Draw them in order of j from one Random for the same sequence. */
export function inventedLatencyMessage(j: number, rng: Random, streams = INVENTED_STREAMS): { key: string; value: string } {
  const slow = rng.uniform() < 0.2;
  const ms = Math.exp((slow ? Math.log(180) : Math.log(40)) + (slow ? 0.3 : 0.25) * rng.normal());
  return { key: `svc-${j % streams}`, value: `{"ts":${T0 + j * 5},"value":${ms.toFixed(3)}}` };
}
