/**
 * Why a value never reaches a model. Counted by reason by every caller; the set is
 * closed so that metrics have bounded label values.
 */
export type ValueRejection = 'not_finite' | 'out_of_domain' | 'wrong_dimension';
export const VALUE_REJECTIONS: readonly ValueRejection[] = ['not_finite', 'out_of_domain', 'wrong_dimension'];
