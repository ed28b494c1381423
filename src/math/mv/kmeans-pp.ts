import type { Random } from '../random.js';

/**
 * k-means++ seeding (Arthur & Vassilvitskii 2007, "k-means++: the advantages of careful
 * seeding"): the first centre uniformly at random, each next one with probability
 * proportional to D(x)², the squared distance to the nearest centre chosen so far.
 * When every D(x)² is zero (repeated identical rows) the next centre is uniform.
 * Returns the indices of the chosen rows.
 */
export function kmeansPlusPlus(data: Float64Array, n: number, d: number, k: number, rng: Random): Int32Array {
  const chosen = new Int32Array(k);
  const dist = new Float64Array(n).fill(Infinity);
  chosen[0] = rng.int(n);
  for (let c = 1; c <= k; c++) {
    const cOff = chosen[c - 1] * d;
    let total = 0;
    for (let r = 0; r < n; r++) {
      let s = 0;
      for (let i = 0; i < d; i++) {
        const t = data[r * d + i] - data[cOff + i];
        s += t * t;
      }
      if (s < dist[r]) dist[r] = s;
      total += dist[r];
    }
    if (c === k) break;
    if (!(total > 0) || !Number.isFinite(total)) {
      chosen[c] = rng.int(n);
      continue;
    }
    let u = rng.uniform() * total;
    let pick = n - 1;
    for (let r = 0; r < n; r++) {
      u -= dist[r];
      if (u < 0) {
        pick = r;
        break;
      }
    }
    chosen[c] = pick;
  }
  return chosen;
}
