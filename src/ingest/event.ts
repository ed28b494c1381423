/**
 * The decoded event. One slot is reused for every event on the hot path, so decoding
 * allocates nothing per event: decoders fill it, the caller reads it before the next.
 */

/** Largest vector dimension a stream may carry (the multivariate model is for d <= 8). */
export const MAX_DIM = 8;

export class EventSlot {
  /** Stream key (interned where the decoder can). */
  stream = '';
  /** Event time, epoch milliseconds (may carry a fraction). */
  ts = 0;
  /** The value when dim === 1. */
  value = 0;
  /** 1 = scalar in `value`; > 1 = vector in vector[0..dim-1]. */
  dim = 1;
  vector = new Float64Array(MAX_DIM);
  /** Position within the partition (Kafka offset or 0-based line index); set by the caller. */
  offset = 0;
  /** Source partition name; set by the caller. */
  partition = '';
}

/** Why a record never became an event. A closed set: these are metric label values. */
export type DecodeRejection =
  | 'unparseable'
  | 'missing_field'
  | 'wrong_type'
  | 'bad_timestamp'
  | 'not_finite'
  | 'oversized'
  | 'wrong_dimension'
  | 'missing_stream';

export const DECODE_REJECTIONS: readonly DecodeRejection[] = [
  'unparseable',
  'missing_field',
  'wrong_type',
  'bad_timestamp',
  'not_finite',
  'oversized',
  'wrong_dimension',
  'missing_stream',
];

/** Epoch milliseconds that JavaScript dates can represent (ECMA-262, "Time Values and Time Range"). */
export const MAX_EPOCH_MS = 8.64e15;
