/**
 * Structural edits of a stepwise-EM multivariate model (OnlineMvMixture has a fixed component
 * count): append a component, remove one, merge two, or change the schedule. Each builds a new
 * model from the old one's sufficient statistics and latest parameters, in the same working
 * frame, so the edit is exact and deterministic. Births, prunes and merges are rare, so these
 * allocate; nothing here is on the per-event path. Also: Mahalanobis distance of a point to a
 * component and the Bhattacharyya distance of two components (for merging).
 */
import { choleskyLower, logDetFromCholesky, mahalanobisSq } from '../math/mv/cholesky.js';
import { MvMixture, OnlineMvMixture, type OnlineMvSettings } from '../math/mv/index.js';

function tri(d: number): number {
  return (d * (d + 1)) / 2;
}

interface Parts {
  mixture: MvMixture;
  weight: Float64Array;
  mean: Float64Array;
  scatter: Float64Array;
}

function emptyParts(like: MvMixture, k: number): Parts {
  const d = like.d;
  return {
    mixture: new MvMixture(k, d, { center: like.center, scale: like.scale }, like.regCovar),
    weight: new Float64Array(k),
    mean: new Float64Array(k * d),
    scatter: new Float64Array(k * tri(d)),
  };
}

/** Copy component `from` of `model` (statistics and parameters) into slot `to` of `p`, scaling its mass by `f`. */
function copyComponent(model: OnlineMvMixture, from: number, p: Parts, to: number, f: number): void {
  const d = model.d;
  const t = tri(d);
  const m = model.mixture;
  p.weight[to] = model.statWeight[from] * f;
  for (let i = 0; i < d; i++) p.mean[to * d + i] = model.statMean[from * d + i];
  for (let q = 0; q < t; q++) p.scatter[to * t + q] = model.statScatter[from * t + q] * f;
  p.mixture.weights[to] = m.weights[from] * f;
  for (let i = 0; i < d; i++) p.mixture.frameMeans[to * d + i] = m.frameMeans[from * d + i];
  const dd = d * d;
  for (let q = 0; q < dd; q++) p.mixture.frameCovariances[to * dd + q] = m.frameCovariances[from * dd + q];
}

function build(model: OnlineMvMixture, p: Parts, settings: OnlineMvSettings = model.settings, t?: number): OnlineMvMixture {
  p.mixture.normalizeWeights();
  p.mixture.refresh();
  const c = model.counters();
  return OnlineMvMixture.restore(p.mixture, settings, {
    t: t ?? c.t,
    seen: c.seen,
    sinceMStep: c.sinceMStep,
    weight: p.weight,
    mean: p.mean,
    scatter: p.scatter,
  });
}

/**
 * A new model with one more component: mean (d) and covariance (d·d, row-major) in stream units,
 * weight w in (0, 1); the others keep their shape and share 1 − w.
 */
export function withComponent(model: OnlineMvMixture, mean: ArrayLike<number>, cov: ArrayLike<number>, w: number): OnlineMvMixture {
  const { k, d } = model;
  const m = model.mixture;
  const p = emptyParts(m, k + 1);
  let total = 0;
  for (let j = 0; j < k; j++) total += model.statWeight[j];
  if (!(total > 0)) total = 1;
  for (let j = 0; j < k; j++) copyComponent(model, j, p, j, 1 - w);
  const mass = w * total;
  p.weight[k] = mass;
  p.mixture.weights[k] = w;
  const t = tri(d);
  let q = k * t;
  for (let a = 0; a < d; a++) {
    const za = (mean[a] - m.center[a]) * m.invScale[a];
    p.mean[k * d + a] = za;
    p.mixture.frameMeans[k * d + a] = za;
    for (let b = 0; b < d; b++) {
      const c = cov[a * d + b] * m.invScale[a] * m.invScale[b];
      p.mixture.frameCovariances[k * d * d + a * d + b] = a === b ? c + m.regCovar : c;
      // The statistics hold mass · (covariance − floor); the M-step adds the floor back.
      if (b <= a) p.scatter[q++] = mass * c;
    }
  }
  return build(model, p);
}

/** A new model without component j (k ≥ 2). */
export function withoutComponent(model: OnlineMvMixture, j: number): OnlineMvMixture {
  const p = emptyParts(model.mixture, model.k - 1);
  for (let a = 0, to = 0; a < model.k; a++) if (a !== j) copyComponent(model, a, p, to++, 1);
  return build(model, p);
}

/**
 * A new model where components a and b (a < b) became one at slot a, by moment matching:
 * mass W = Wa + Wb, mean = (Wa·ma + Wb·mb)/W, scatter = Sa + Sb + (Wa·Wb/W)(ma − mb)(ma − mb)ᵀ
 * (the pooled scatter of two weighted samples); b is removed.
 */
export function withMerged(model: OnlineMvMixture, a: number, b: number): OnlineMvMixture {
  const d = model.d;
  const t = tri(d);
  const p = emptyParts(model.mixture, model.k - 1);
  for (let j = 0, to = 0; j < model.k; j++) if (j !== b) copyComponent(model, j, p, to++, 1);
  const wa = model.statWeight[a];
  const wb = model.statWeight[b];
  const W = wa + wb;
  if (W > 0) {
    const diff = new Float64Array(d);
    for (let i = 0; i < d; i++) {
      diff[i] = model.statMean[a * d + i] - model.statMean[b * d + i];
      p.mean[a * d + i] = (wa * model.statMean[a * d + i] + wb * model.statMean[b * d + i]) / W;
    }
    const c = (wa * wb) / W;
    p.weight[a] = W;
    let q = 0;
    for (let r = 0; r < d; r++) {
      for (let s = 0; s <= r; s++, q++) p.scatter[a * t + q] = model.statScatter[a * t + q] + model.statScatter[b * t + q] + c * diff[r] * diff[s];
    }
    // Parameters of the merged component from its statistics, as the M-step would set them.
    const m = p.mixture;
    m.weights[a] = model.mixture.weights[a] + model.mixture.weights[b];
    q = 0;
    for (let r = 0; r < d; r++) {
      m.frameMeans[a * d + r] = p.mean[a * d + r];
      for (let s = 0; s <= r; s++, q++) {
        const v = p.scatter[a * t + q] / W + (r === s ? m.regCovar : 0);
        m.frameCovariances[a * d * d + r * d + s] = v;
        m.frameCovariances[a * d * d + s * d + r] = v;
      }
    }
  }
  return build(model, p);
}

/** The same model under another schedule (e.g. the current model becoming the reference), with schedule counter t. */
export function withSettings(model: OnlineMvMixture, settings: OnlineMvSettings, t: number): OnlineMvMixture {
  const p = emptyParts(model.mixture, model.k);
  for (let j = 0; j < model.k; j++) copyComponent(model, j, p, j, 1);
  return build(model, p, settings, t);
}

/** Scratch for the distances below (single-threaded use). */
const S_DIFF = new Float64Array(8);
const S_Y = new Float64Array(8);
const S_Z = new Float64Array(8);
const S_COV = new Float64Array(64);
const S_CHOL = new Float64Array(64);
const S_INV = new Float64Array(8);

/** Squared Mahalanobis distance of x (stream units) to component j of m. Allocation-free. */
export function mahalanobis2(m: MvMixture, j: number, x: ArrayLike<number>): number {
  const d = m.d;
  m.toFrame(x, S_Z);
  for (let i = 0; i < d; i++) S_DIFF[i] = S_Z[i] - m.frameMeans[j * d + i];
  return mahalanobisSq(m.frameChol, j * d * d, m.frameInvDiag, j * d, d, S_DIFF, S_Y);
}

/**
 * Bhattacharyya distance between components a and b of m (common practice; Bhattacharyya 1943):
 * D = ⅛ Δᵀ Σ⁻¹ Δ + ½ ln(det Σ / √(det Σa det Σb)), Σ = (Σa + Σb)/2, computed in the working frame
 * (the distance is invariant under the frame's affine map). Allocation-free.
 */
export function bhattacharyya(m: MvMixture, a: number, b: number): number {
  const d = m.d;
  const dd = d * d;
  for (let q = 0; q < dd; q++) S_COV[q] = 0.5 * (m.frameCovariances[a * dd + q] + m.frameCovariances[b * dd + q]);
  if (!choleskyLower(S_COV, 0, d, S_CHOL, 0, S_INV, 0)) return Infinity;
  for (let i = 0; i < d; i++) S_DIFF[i] = m.frameMeans[a * d + i] - m.frameMeans[b * d + i];
  const q = mahalanobisSq(S_CHOL, 0, S_INV, 0, d, S_DIFF, S_Y);
  const ld = logDetFromCholesky(S_CHOL, 0, d);
  return q / 8 + 0.5 * (ld - 0.5 * (m.frameLogDet[a] + m.frameLogDet[b]));
}
