/**
 * The Node side of the HTML reports: reads uPlot's build and style sheet from the installed package at report
 * time (so the report carries them inline and opens from disk with no network), runs the analysis a simulation
 * report needs, and returns the report as an output file for `writeOutputs`.
 */
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { analyzeRecordings, MIN_ANALYSIS_SAMPLES } from '../analysis/recording-analysis.ts';
import { onsetDelaySamples } from '../analysis/path-model.ts';
import type { SimulationResult } from '../plant/simulate.ts';
import type { SampleSource } from '../analysis/welch.ts';
import type { OutputFile } from './files-node.ts';
import { InputError } from './files-node.ts';
import {
  renderAnalysisReport,
  renderSimulationReport,
  type AnalysisReportMeta,
  type ReportAssets,
  type SimulationReportOptions,
  type SimulationReportSummary,
} from './report-html.ts';
import type { RecordingAnalysis } from '../analysis/recording-analysis.ts';

/** File name of the report inside the output folder. */
export const REPORT_FILE = 'report.html';

let cached: ReportAssets | null = null;

/** uPlot's IIFE build and CSS, read once from node_modules. */
export function readReportAssets(): ReportAssets {
  if (cached) return cached;
  try {
    const require = createRequire(import.meta.url);
    const dist = join(dirname(require.resolve('uplot/package.json')), 'dist');
    cached = {
      uplotJs: readFileSync(join(dist, 'uPlot.iife.min.js'), 'utf8'),
      uplotCss: readFileSync(join(dist, 'uPlot.min.css'), 'utf8'),
    };
    return cached;
  } catch (e) {
    throw new InputError(`cannot read the plotting library for the HTML report (the "uplot" package): ${(e as Error).message}`);
  }
}

/** The run's signals the report analyses, in memory or read on demand (e.g. from the written signals.wav). */
export interface ReportSignals {
  reference: Float32Array | SampleSource;
  errorOff: Float32Array | SampleSource;
  errorOn: Float32Array | SampleSource;
}

/**
 * The simulation report's HTML. Needs the run's signals: recorded (simulate with `record: true`) or given
 * as `signals` (sources read from the written signals.wav, as `simulate --out` does, so memory stays flat);
 * the coherence and causality use the control-off reference and error, the spectra and bands the last
 * 25 % of the run (the steady state of the summary's attenuation).
 */
export function simulationReportHtml(summary: SimulationReportSummary, result: SimulationResult, options: SimulationReportOptions & { signals?: ReportSignals } = {}): string {
  const sig: ReportSignals | undefined = options.signals ?? result.signals;
  if (!sig) throw new RangeError('the simulation report needs the run\'s signals: run simulate with record: true, or pass them as signals');
  const model = result.secondaryPathModel;
  let delayMs: number | null = null;
  try {
    delayMs = (1000 * onsetDelaySamples(model)) / result.sampleRate;
  } catch {
    delayMs = null; // an all-zero model has no onset
  }
  if (sig.reference.length < MIN_ANALYSIS_SAMPLES) {
    const why = `the run is too short for spectra (${sig.reference.length} samples, at least ${MIN_ANALYSIS_SAMPLES} needed)`;
    return renderSimulationReport(summary, result, null, readReportAssets(), { ...options, analysisSkipped: why });
  }
  const analysis = analyzeRecordings(
    {
      sampleRate: result.sampleRate,
      reference: options.signals ? sig.reference : (options.referenceOff ?? sig.reference),
      errorOff: sig.errorOff,
      errorOn: sig.errorOn,
      ...(delayMs !== null ? { model: { taps: model, delayMs } } : {}),
    },
    // The summary's steady state, the last 25 % of the run, or as much of the end as the analysis needs.
    { comparisonStartS: Math.min(0.75 * result.durationS, (sig.errorOff.length - MIN_ANALYSIS_SAMPLES) / result.sampleRate) },
  );
  return renderSimulationReport(summary, result, analysis, readReportAssets(), options);
}

/** The report as an output file, to add to the list `simulate --out` passes to writeOutputs. */
export function simulationReportFiles(summary: SimulationReportSummary, result: SimulationResult, options: SimulationReportOptions & { signals?: ReportSignals } = {}): OutputFile[] {
  return [{ name: REPORT_FILE, data: simulationReportHtml(summary, result, options) }];
}

/** The analysis report's HTML. */
export function analysisReportHtml(analysis: RecordingAnalysis, meta: AnalysisReportMeta): string {
  return renderAnalysisReport(analysis, meta, readReportAssets());
}
