/** An invented alert transition for sink tests: a new mode near 912 ms in a checkout stream. */
import type { AlertEvidence, AlertTransition } from '../../src/detect/alert.js';

export function sampleTransition(over: Partial<AlertTransition> = {}, evidence: Partial<AlertEvidence> = {}): AlertTransition {
  return {
    key: 'checkout/mode_emerged/2',
    stream: 'checkout',
    kind: 'mode_emerged',
    state: 'firing',
    ts: 1_700_000_060_000,
    offset: 1234,
    startsAt: 1_700_000_041_000,
    endsAt: null,
    resolution: null,
    ...over,
    evidence: {
      statistic: 'novelty_cusum',
      value: 14.2,
      threshold: 9.5,
      componentId: 2,
      before: [
        { id: 0, weight: 0.8, location: 40, spread: 6, mean: 40 },
        { id: 1, weight: 0.2, location: 180, spread: 25, mean: 180 },
      ],
      after: [
        { id: 0, weight: 0.78, location: 40.3, spread: 6.1, mean: 40.3 },
        { id: 1, weight: 0.194, location: 181, spread: 24, mean: 181 },
        { id: 2, weight: 0.026, location: 912, spread: 80, mean: 915 },
      ],
      firstEvidenceTs: 1_700_000_041_000,
      firstEvidenceOffset: 1200,
      summary: 'a new mode near 912 ms carries 2.6 % of events (invented example)',
      ...evidence,
      ...(over.evidence ?? {}),
    },
  };
}
