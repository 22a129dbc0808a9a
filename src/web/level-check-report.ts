/**
 * The live level-cap check's report, as the user saves it: one JSON object and one self-contained
 * HTML page (src/io/limits-report-html.ts, uPlot inlined), both downloaded through Blob links, so
 * nothing leaves the machine.
 *
 * The JSON starts with the same six fields as `ancbench check-limits --json`, in the same order:
 * `ceilingDbfs`, `maxSamplePeakDbfs`, `maxTruePeakDbtp`, `limiterMode`, `passed`, `events`; then the
 * rest of the check's result like the command's report.json (the limiter's gain-reduction history
 * under `history`, every event), and what only a live run has: `handedToOutput`, the live processor's
 * own count of the samples it handed to the audio output, and the device. The live run has no
 * scenario and no closed loop (`closedLoop: null`).
 *
 * `passed` holds only when the check passed and no sample handed to the output went above the
 * ceiling or was not finite.
 */
import type { HandedToOutput } from '../protocol/messages.ts';
import type { LevelCapResult } from '../engine/level-cap-check.ts';
import { renderLimitsReport } from '../io/limits-report-html.ts';
import { safeJson } from '../io/json.ts';
import { buildLimitsReport, type LimitsReportFields } from '../io/limits-report.ts';
import type { ReportAssets } from '../io/report-html.ts';

export const REPORT_JSON_FILE = 'level-check.json';
export const REPORT_HTML_FILE = 'level-check.html';

/** The first six fields of the report, fixed names shared with the command line. */
export { FIXED_REPORT_KEYS } from '../io/limits-report.ts';

export interface LiveContext {
  /** Output device label (or "system default"). */
  outputDevice: string;
  /** Error-mic device label, when the error mic was recorded. */
  errorMicDevice: string | null;
  sampleRate: number;
  /** ISO time the check ended. */
  finishedAt: string;
}

export interface LiveLevelCheckReport extends LimitsReportFields {
  /** The check passed and every sample handed to the output stayed within the ceiling. */
  passed: boolean;
  source: 'live';
  live: LiveContext;
  /** The live processor's own count of what it handed to the audio output. */
  handedToOutput: HandedToOutput;
  closedLoop: null;
  /** Per ~10 ms: test-signal level and peak, output sample and true peak, limiter gain reduction, error-mic peak. */
  history: LevelCapResult['history'];
}

export function buildLevelCheckReport(r: LevelCapResult, handed: HandedToOutput, live: LiveContext): LiveLevelCheckReport {
  const moreReasons: string[] = [];
  if (handed.samplesOverCeiling > 0) {
    moreReasons.push(`${handed.samplesOverCeiling} samples handed to the audio output exceeded the ${handed.ceilingDbfs.toFixed(2)} dBFS ceiling (largest ${handed.maxSamplePeakDbfs.toFixed(3)} dBFS)`);
  }
  if (handed.nonFinite > 0) moreReasons.push(`${handed.nonFinite} samples handed to the audio output were not finite`);
  return buildLimitsReport(r, {
    moreReasons,
    origin: { source: 'live' as const, live },
    beforeCheck: { handedToOutput: handed },
    closedLoop: null,
    moreNotes: [
      `live run: ${handed.samples} samples handed to the audio output (${live.outputDevice}) were counted by the audio processor as they left it; what the amplifier and loudspeaker make of them is outside the check`,
    ],
  });
}

/** JSON with null for NaN and ±Infinity and typed arrays as lists (the tool never writes NaN into JSON). */
export function reportJson(value: unknown): string {
  return safeJson(value, 2);
}

let assets: Promise<ReportAssets> | null = null;

/** uPlot's IIFE build and style sheet as text, for inlining into the saved page (a separate chunk, loaded on first use). */
export function reportAssets(): Promise<ReportAssets> {
  if (!assets) {
    assets = Promise.all([import('uplot/dist/uPlot.iife.min.js?raw'), import('uplot/dist/uPlot.min.css?raw')]).then(([js, css]) => ({
      uplotJs: js.default,
      uplotCss: css.default,
    }));
  }
  return assets;
}

/** The readable page of a report. */
export async function levelCheckHtml(rep: LiveLevelCheckReport, result: LevelCapResult): Promise<string> {
  const a = await reportAssets();
  return renderLimitsReport(
    {
      scenario: `live output: ${rep.live.outputDevice}, ${rep.live.sampleRate} Hz`,
      name: 'live loudspeaker output',
      check: result,
      closedLoop: null,
      passed: rep.passed,
      reasons: rep.reasons,
      footer: `ancbench panel, live level-cap check, ${rep.live.finishedAt}. Samples handed to the audio output: ${rep.handedToOutput.samples}, ${rep.handedToOutput.samplesOverCeiling} above the ceiling, largest ${rep.handedToOutput.maxSamplePeakDbfs.toFixed(3)} dBFS.`,
    },
    a,
  );
}
