/**
 * Running mean and variance of the surprise -log p_ref(x) of events under the reference, learned while the
 * stream is quiet (a 1/n average, then a window): the fit CUSUM standardises each event's surprise by them.
 * Shared by the 1-D and the vector monitor.
 */
/** How a tracker is saved inside a monitor's state (flat, under these names). */
export interface SurpriseFields {
  surpriseMean: number;
  surpriseVar: number;
  surpriseCount: number;
}

export class SurpriseTracker {
  mean = 0;
  variance = 1;
  count = 0;

  learn(s: number, window: number): void {
    if (!Number.isFinite(s)) return;
    this.count++;
    const g = Math.max(1 / this.count, 1 / window);
    const d = s - this.mean;
    this.mean += g * d;
    this.variance = Math.max((1 - g) * (this.variance + g * d * d), 1e-6);
  }

  /** Log-likelihood per event of the events learned (nats), or null before any. */
  logLikelihoodPerEvent(): number | null {
    return this.count === 0 ? null : -this.mean;
  }

  exportFields(): SurpriseFields {
    return { surpriseMean: this.mean, surpriseVar: this.variance, surpriseCount: this.count };
  }

  importFields(s: SurpriseFields): void {
    this.mean = s.surpriseMean;
    this.variance = s.surpriseVar;
    this.count = s.surpriseCount;
  }

  /** The surprise in standard units, clipped to ±clip so one wild event cannot decide alone. */
  standardized(s: number, clip: number): number {
    const z = (s - this.mean) / Math.sqrt(this.variance);
    return z > clip ? clip : z < -clip ? -clip : z;
  }
}
