/** An invented checkpoint of two partitions and three streams, for the checkpoint store tests. */
import type { Checkpoint } from '../../src/state/store.js';

export const SAMPLE_CHECKPOINT: Checkpoint = {
  positions: { 'lat-0': 120, 'lat-1': 7 },
  counters: { 'lat-0': { events: 118, rejected_unparseable: 2 }, 'lat-1': { events: 7 } },
  streams: [
    { stream: 'checkout', partition: 'lat-0', state: '{"v":1,"k":2}' },
    { stream: 'search', partition: 'lat-0', state: '{"v":1,"k":1}' },
    { stream: 'login', partition: 'lat-1', state: '{"v":1,"k":3}' },
  ],
};
