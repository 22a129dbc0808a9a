/**
 * The level-cap report object, shared by `ancbench check-limits` (report.json, `--json`) and the panel's
 * live level check (level-check.json). Plain objects only (no Node APIs, no DOM), so both hosts build the
 * same fields in the same order.
 *
 * Field order, which both files keep: the six fixed fields (FIXED_REPORT_KEYS), `reasons`, `verdict`,
 * `guarantee`, what was checked
 * (the host's `origin` fields), the rest of the check's headline figures, the host's `beforeCheck` fields,
 * `check` (the remaining result), `closedLoop`, `notes`, `history`, then the host's `tail` fields.
 */
import { capVerdict, limitsTruePeak, type LevelCapResult } from '../engine/level-cap-check.ts';

/** The first six fields of every level-cap report, fixed names shared by the command line and the panel. */
export const FIXED_REPORT_KEYS = ['ceilingDbfs', 'maxSamplePeakDbfs', 'maxTruePeakDbtp', 'limiterMode', 'passed', 'events'] as const;

/** Fields of the check's result that a report lifts to its top level; the rest go under `check`. */
type Promoted = 'ceilingDbfs' | 'maxSamplePeakDbfs' | 'maxTruePeakDbtp' | 'limiterMode' | 'passed' | 'events' | 'reasons' | 'latencySamples' | 'maxGainReductionDb' | 'samplesOverCeiling' | 'nonFiniteOutputSamples' | 'truePeakToleranceDb' | 'ceiling' | 'history' | 'notes';

/** What a report keeps under `check`: the check's result less the fields lifted to the top. */
export type LimitsReportCheck = Omit<LevelCapResult, Promoted>;

/** The fields every level-cap report has (besides `history`, which the command's `--json` leaves out). */
export interface LimitsReportFields {
  ceilingDbfs: number;
  maxSamplePeakDbfs: number;
  maxTruePeakDbtp: number;
  limiterMode: LevelCapResult['limiterMode'];
  /** No reason to fail: the check's own reasons and the host's `moreReasons` are all absent. */
  passed: boolean;
  /** Every event of the check (guard and limiter), time, cause, values, action. */
  events: LevelCapResult['events'];
  reasons: string[];
  /** The one-line verdict (`capVerdict`): what held, in this limiter mode; never plain PASSED in a sample-peak mode. */
  verdict: string;
  /** What `passed` guarantees: 'sample-and-true-peak' (the default and the true-peak modes) or 'sample-peak'. */
  guarantee: 'sample-and-true-peak' | 'sample-peak';
  latencySamples: number;
  maxGainReductionDb: number;
  samplesOverCeiling: number;
  nonFiniteOutputSamples: number;
  truePeakToleranceDb: number | null;
  ceiling: LevelCapResult['ceiling'];
  check: LimitsReportCheck;
  notes: string[];
}

/** What a host adds to the check's result; see the module comment for where each part goes. */
export interface LimitsReportParts<O extends object, B extends object, C, T extends object> {
  /** Reasons to fail found by the host, after the check's own. */
  moreReasons: readonly string[];
  /** Fields naming what was checked, placed after `reasons`. */
  origin: O;
  /** Fields placed just before `check`. */
  beforeCheck?: B;
  closedLoop: C;
  /** Notes by the host, after the check's own. */
  moreNotes: readonly string[];
  /** Fields placed last. */
  tail?: T;
  /** The host's own largest true peak (e.g. its closed loop), dBTP: the sample-peak modes' verdict quotes the larger. */
  moreTruePeakDbtp?: number | null;
}

export function buildLimitsReport<O extends object, C, B extends object = object, T extends object = object>(
  r: LevelCapResult,
  parts: LimitsReportParts<O, B, C, T>,
): LimitsReportFields & O & B & T & { closedLoop: C; history: LevelCapResult['history'] } {
  const reasons = [...r.reasons, ...parts.moreReasons];
  const {
    ceilingDbfs, maxSamplePeakDbfs, maxTruePeakDbtp, limiterMode, passed: _p, events, reasons: _r, latencySamples, maxGainReductionDb,
    samplesOverCeiling, nonFiniteOutputSamples, truePeakToleranceDb, ceiling, history, notes, ...check
  } = r;
  const passed = reasons.length === 0;
  const truePeak = Math.max(maxTruePeakDbtp, parts.moreTruePeakDbtp ?? -Infinity);
  return {
    ceilingDbfs,
    maxSamplePeakDbfs,
    maxTruePeakDbtp,
    limiterMode,
    passed,
    events,
    reasons,
    verdict: capVerdict(passed, limiterMode, truePeak, reasons),
    guarantee: limitsTruePeak(limiterMode) ? 'sample-and-true-peak' : 'sample-peak',
    ...parts.origin,
    latencySamples,
    maxGainReductionDb,
    samplesOverCeiling,
    nonFiniteOutputSamples,
    truePeakToleranceDb,
    ceiling,
    ...(parts.beforeCheck as B),
    check,
    closedLoop: parts.closedLoop,
    notes: [...notes, ...parts.moreNotes],
    history,
    ...(parts.tail as T),
  };
}
