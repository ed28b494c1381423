/**
 * The version of a saved monitor's state, and the upgrade of older saves, shared by the 1-D and vector monitors.
 *
 * - 1: shift CUSUMs saved as S (nats), and nine weight constants per component (the six of
 *   weight-alternatives.ts, then ln b of each alternative).
 * - 2: shift CUSUMs saved as R = e^S, the form they are kept in (cusum-bank.ts), and six constants.
 */
import { RatioCusums } from './cusum-bank.js';
import { WEIGHT_CONSTS } from './weight-alternatives.js';

export const MONITOR_STATE_VERSION = 2;

const VERSION1_WEIGHT_CONSTS = 9;

export interface ShiftFields {
  version: 1 | 2;
  shifts: number[];
  consts: number[];
}

/** The shift statistics and weight constants of a saved state, in the current version's form. */
export function currentShiftFields(s: ShiftFields, what: string): { shifts: number[]; consts: number[] } {
  if (s.version === MONITOR_STATE_VERSION) return { shifts: s.shifts, consts: s.consts };
  if (s.version === 1) {
    return {
      shifts: RatioCusums.fromSavedLogs(s.shifts),
      consts: s.consts.filter((_, n) => n % VERSION1_WEIGHT_CONSTS < WEIGHT_CONSTS),
    };
  }
  throw new Error(`${what} state version ${String(s.version)} is not supported (this build reads 1 and ${MONITOR_STATE_VERSION})`);
}
