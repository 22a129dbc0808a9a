/**
 * The level-cap report: what `ancbench check-limits --out` writes beside report.json, as one self-contained
 * HTML page (uPlot inlined by report-html.ts's `renderReportHtml`). Builds strings only; the caller passes the
 * plotting library's text (report-html-node.ts `readReportAssets`).
 *
 * Content: the verdict, the cap and how it was set (dBFS, or the stricter SPL rule), the largest sample peak and
 * 4× true peak, the test signal, the level ramp (test-signal level and peak, output sample and true peak against
 * the ceiling), the limiter's gain-reduction history, the scenario's closed loop (peak output against the cap)
 * and every event of both runs.
 */
import { REPORT } from '../palette.ts';
import type { EngineEvent } from '../engine/events.ts';
import { capVerdict, limitsTruePeak, type LevelCapResult } from '../engine/level-cap-check.ts';
import { TRUE_PEAK_FILTER_BOUND_DB } from '../dsp/limiter.ts';
import { renderReportHtml, REPORT_COLORS, type PlotSpec, type ReportAssets, type ReportSection } from './report-html.ts';

/** The scenario's closed loop run beside the check: its output against the same cap. */
export interface ClosedLoopCap {
  durationS: number;
  /** The ceiling the closed loop ran with, dBFS. */
  ceilingDbfs: number;
  peakOutputDbfs: number | null;
  truePeakDbtp: number | null;
  samplesOverCeiling: number;
  nonFiniteOutputSamples: number;
  withinCap: boolean;
  diverged: boolean;
  divergenceReasons: string[];
  events: EngineEvent[];
  /** Output sample peak per ~10 ms, for the plot (dBFS). */
  peakTimeline: { timeS: ArrayLike<number>; peakDbfs: ArrayLike<number> };
}

/** What the page needs: the check's result and where it came from. */
export interface LimitsReportInput {
  scenario: string;
  name: string | null;
  check: LevelCapResult;
  closedLoop: ClosedLoopCap | null;
  /** Overall verdict (the check and the closed loop). */
  passed: boolean;
  reasons: string[];
  footer?: string;
}

/** Colours of the level-cap plots, beside the shared report colours (the project's palette, src/palette.ts). */
const CAP = REPORT.cap;
const SAMPLE_PEAK = REPORT_COLORS.on;
const TRUE_PEAK = REPORT_COLORS.model;
const LEVEL = REPORT_COLORS.truth;
const INPUT_PEAK = REPORT_COLORS.off;
const GAIN_REDUCTION = REPORT_COLORS.reference;

/** Fixed-point text, 'n/a' for missing values, never "-0.00". */
export function fixed(v: number | null | undefined, digits = 2): string {
  if (v === null || v === undefined || !Number.isFinite(v)) return 'n/a';
  const t = v.toFixed(digits);
  return /^-0\.?0*$/.test(t) ? t.slice(1) : t;
}
const f = fixed;

/** "2.000 s  output-at-ceiling → mute" and its values, one table row per event. */
export function eventRows(events: readonly EngineEvent[]): [string, string][] {
  return events.map((e) => [
    `${e.timeS.toFixed(3)} s  ${e.cause}`,
    `action: ${e.action}; ${Object.entries(e.values)
      .map(([k, v]) => `${k} = ${Number.isFinite(v) ? +v.toPrecision(4) : 'n/a'}`)
      .join(', ')}`,
  ]);
}

function modeText(r: LevelCapResult): string {
  const ms = (1000 * r.latencySamples) / r.sampleRate;
  if (r.limiterMode === 'zero-latency') return 'zero latency (sample peak limited; true peak reported only)';
  if (r.limiterMode === 'look-ahead') return `look-ahead, ${r.latencySamples} samples (${ms.toFixed(2)} ms; sample peak limited; true peak reported only)`;
  if (r.limiterMode === 'true-peak-filter') {
    return `sample-peak limiter and true-peak filter, ${r.latencySamples} samples of added latency (${ms.toFixed(2)} ms; 4× true peak bounded to +${TRUE_PEAK_FILTER_BOUND_DB.toFixed(2)} dB, checked within ${r.truePeakToleranceDb} dB)`;
  }
  return `true peak, ${r.latencySamples} samples of look-ahead (${ms.toFixed(2)} ms; 4× true peak limited to within ${r.truePeakToleranceDb} dB)`;
}

function ceilingText(r: LevelCapResult): string {
  const c = r.ceiling;
  const what = limitsTruePeak(r.limiterMode) ? 'sample peak and 4× true peak' : 'sample peak';
  if (!c.spl) return `${f(r.ceilingDbfs)} dBFS (${what})`;
  const s = c.spl;
  return (
    `${f(r.ceilingDbfs)} dBFS (${what}), the stricter of ${f(c.dbfsCeiling)} dBFS and ${f(s.peakCeilingDbSpl, 1)} dB SPL peak ` +
    `(= ${f(s.uncappedDbfs)} dBFS with the highest calibrated peak sensitivity, ${f(s.peakSensitivityDbSpl, 1)} dB SPL at ${s.limitingHz} Hz); set by the ${c.limitedBy === 'spl' ? 'SPL' : 'dBFS'} ceiling`
  );
}

/** Plots draw NaN as gaps; −Infinity (a silent hop) too. */
function finiteOrNaN(a: ArrayLike<number>): Float64Array {
  return Float64Array.from({ length: a.length }, (_, i) => (Number.isFinite(a[i]!) ? a[i]! : NaN));
}

/** The page. */
export function renderLimitsReport(input: LimitsReportInput, assets: ReportAssets): string {
  const r = input.check;
  const h = r.history;
  const c = r.ceilingDbfs;
  const cl = input.closedLoop;
  const largestTruePeak = Math.max(r.maxTruePeakDbtp, cl?.truePeakDbtp ?? -Infinity);
  const verdict = `${capVerdict(input.passed, r.limiterMode, largestTruePeak, input.reasons)}.`;
  const rows: [string, string][] = [
    ['verdict', verdict],
    ['cap (ceiling)', ceilingText(r)],
    ['limiter mode', modeText(r)],
    ['largest sample peak', `${f(r.maxSamplePeakDbfs, 3)} dBFS (${f(r.maxSamplePeakDbfs - c, 3)} dB from the cap); ${r.samplesOverCeiling} samples above it`],
    [
      'largest true peak (4×, BS.1770-4)',
      `${f(r.maxTruePeakDbtp)} dBTP (${f(r.maxTruePeakDbtp - c)} dB from the cap${limitsTruePeak(r.limiterMode) ? `, tolerance ${r.truePeakToleranceDb} dB` : '; not limited in this mode: a sample-limited signal can read up to about 6 dB higher'})`,
    ],
    ...(r.maxPeakDbSplBound !== null ? ([['largest peak SPL (bound)', `${f(r.maxPeakDbSplBound, 1)} dB SPL at the listening position, highest calibrated sensitivity`]] as [string, string][]) : []),
    ...(r.errorMic
      ? ([['error microphone', `peak ${f(r.errorMic.maxSamplePeakDbfs)} dBFS${r.errorMic.maxPeakDbSpl !== null ? `, ${f(r.errorMic.maxPeakDbSpl, 1)} dB SPL peak` : ''}`]] as [string, string][])
      : []),
    ['largest gain reduction', `${f(r.maxGainReductionDb, 1)} dB`],
    ['non-finite outputs', `${r.nonFiniteOutputSamples} (the limiter silenced ${r.nonFiniteInputSamples} non-finite test samples)`],
    [
      'test signal',
      `${r.segments.filter((s) => s.kind !== 'gap').map((s) => s.kind).join(', ')}; each ramped from ${f(r.startDbfs, 1)} to ${f(r.topDbfs, 1)} dBFS (AES17), tone at ${f(r.toneHz, 1)} Hz; ${r.durationS.toFixed(2)} s at ${r.sampleRate} Hz, blocks of ${r.blockSize}`,
    ],
    ['events', `${r.events.length} in the check${r.eventsDropped ? ` (${r.eventsDropped} lost)` : ''}${cl ? `, ${cl.events.length} in the closed loop` : ''}${r.mutesObserved ? `; ${r.mutesObserved} would have muted (freeze-adaptation during the check)` : ''}`],
  ];
  if (cl) {
    rows.push([
      'closed loop (scenario)',
      `peak output ${f(cl.peakOutputDbfs)} dBFS, true peak ${f(cl.truePeakDbtp)} dBTP, against a ${f(cl.ceilingDbfs)} dBFS ceiling over ${cl.durationS.toFixed(2)} s: ${cl.withinCap ? 'within the cap' : 'CAP EXCEEDED'}${cl.diverged ? `; the guard or the divergence check acted (${cl.divergenceReasons.join('; ')})` : ''}`,
    ]);
  }
  const level = finiteOrNaN(h.levelDbfs);
  const inputPeak = finiteOrNaN(h.inputPeakDbfs);
  const samplePeak = finiteOrNaN(h.samplePeakDbfs);
  const truePeak = finiteOrNaN(h.truePeakDbtp);
  const capLine = new Float64Array(h.timeS.length).fill(c);
  const yLow = Math.floor(Math.min(r.startDbfs, c) - 10);
  const yHigh = Math.ceil(Math.max(r.topDbfs, c) + 10);
  const grTop = Math.max(24, Math.ceil(r.topDbfs - c + 12));
  const plots: PlotSpec[] = [
    {
      title: 'Level ramp through the output stage',
      caption: `Per ${Math.round(1000 * (h.timeS.length > 1 ? h.timeS[1]! - h.timeS[0]! : 0.01))} ms: the test signal's nominal level and sample peak before the output stage, and the output's sample and 4× true peak. Values beyond the axis (the adversarial segment's huge samples) are off scale.`,
      xLabel: 'time (s)',
      yLabel: 'dBFS',
      xScale: 'linear',
      x: h.timeS,
      yRange: [yLow, yHigh],
      series: [
        { label: 'test signal level', values: level, color: LEVEL, dash: [4, 3] },
        { label: 'test signal peak', values: inputPeak, color: INPUT_PEAK },
        { label: 'output sample peak', values: samplePeak, color: SAMPLE_PEAK },
        { label: 'output true peak', values: truePeak, color: TRUE_PEAK, dash: [2, 2] },
        { label: 'cap', values: capLine, color: CAP, dash: [8, 4] },
      ],
    },
    {
      title: 'Limiter gain reduction',
      caption: `Largest gain reduction per hop; the run's maximum was ${f(r.maxGainReductionDb, 1)} dB${r.maxGainReductionDb > grTop ? ' (off scale here)' : ''}.`,
      xLabel: 'time (s)',
      yLabel: 'dB',
      xScale: 'linear',
      x: h.timeS,
      yRange: [0, grTop],
      series: [{ label: 'gain reduction', values: finiteOrNaN(h.gainReductionDb), color: GAIN_REDUCTION }],
    },
  ];
  // one plot per section: each then takes the page's full width
  const sections: ReportSection[] = [
    { title: 'Result', table: { rows } },
    { title: 'Level ramp', plots: [plots[0]!] },
    { title: 'Limiter gain reduction', plots: [plots[1]!] },
  ];
  if (cl) {
    const t = cl.peakTimeline;
    sections.push({
      title: "The scenario's closed loop",
      paragraphs: [
        `The scenario run with control on, as \`ancbench simulate\` runs it, with the same cap: its loudspeaker signal must stay under the cap too.`,
      ],
      plots: [
        {
          title: 'Closed-loop output peak',
          caption: 'Sample peak of the anti-noise (the controller’s output) after the limiter, per 10 ms; gaps are silence (control off, or muted).',
          xLabel: 'time (s)',
          yLabel: 'dBFS',
          xScale: 'linear',
          x: t.timeS,
          series: [
            { label: 'output sample peak', values: finiteOrNaN(t.peakDbfs), color: SAMPLE_PEAK },
            { label: 'cap', values: new Float64Array(t.timeS.length).fill(cl.ceilingDbfs), color: CAP, dash: [8, 4] },
          ],
        },
      ],
    });
  }
  sections.push({
    title: 'Events of the level-cap check',
    ...(r.events.length ? { table: { rows: eventRows(r.events) } } : { paragraphs: ['none'] }),
  });
  if (cl) sections.push({ title: 'Events of the closed loop', ...(cl.events.length ? { table: { rows: eventRows(cl.events) } } : { paragraphs: ['none'] }) });
  sections.push({
    title: 'Notes and cautions',
    paragraphs: [
      ...r.notes,
      'The cap bounds the digital signal; what an amplifier and loudspeaker make of it is outside the check. Start at a low volume, prefer headphones at a low level or a loudspeaker at a distance, and stop at discomfort or ringing ears. This report does not certify hearing safety.',
    ],
  });
  return renderReportHtml(
    {
      title: input.name ? `Level-cap check: ${input.name}` : 'Level-cap check',
      subtitle: `${input.scenario} · ${input.passed ? 'passed' : 'FAILED'}`,
      sections,
      ...(input.footer ? { footer: input.footer } : {}),
    },
    assets,
  );
}
