/** Multivariate (d ≤ 8) Gaussian mixtures with full covariances: batch EM, stepwise EM, serialisation. */
export { MvMixture, MV_MAX_DIM, DEFAULT_REG_COVAR } from './mixture.js';
export { fitMvMixture, selectMvMixture } from './batch-em.js';
export type { MvFitOptions, MvFitResult, MvSelectOptions, MvSelectResult } from './batch-em.js';
export { OnlineMvMixture } from './online-em.js';
export type { OnlineMvOptions, OnlineMvSettings } from './online-em.js';
export {
  mvToJSON,
  mvFromJSON,
  mvMixtureFromJSON,
  onlineMvFromJSON,
  MvFormatError,
  MV_FORMAT_VERSION,
  MV_MIXTURE_FORMAT,
  MV_ONLINE_FORMAT,
} from './serialize.js';
export type { MvMixtureDocument, OnlineMvDocument } from './serialize.js';
export { validateVector } from './validate.js';
export { frameFromData, type Frame } from './frame.js';
export { kmeansPlusPlus } from './kmeans-pp.js';
