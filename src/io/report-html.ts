/**
 * Self-contained HTML reports: one file that opens from disk with no network. The plotting library (uPlot)
 * and its style sheet are inlined, the data are embedded as JSON in a non-executed script element, and a small
 * inline script draws the plots when the page loads. This module builds strings only (no file access): the
 * caller passes the library's text in `ReportAssets` (report-html-node.ts reads it from node_modules).
 *
 * Two reports are built here from the analysis results:
 * - `renderSimulationReport`: for `ancbench simulate --out`: error level over time with control off and on,
 *   spectra off/on, one-third-octave band levels, coherence and its bound beside the achieved attenuation, and
 *   the secondary-path model (impulse response and magnitude);
 * - `renderAnalysisReport`: for `ancbench analyze --out`: PSDs, coherence and bound, band levels, and the
 *   model's magnitude, phase and impulse response when one was given.
 *
 * Levels on the plots follow the project's AES17 convention (a full-scale sine reads 0 dBFS); a PSD is shown as
 * 10·log10(2·PSD) in dBFS/Hz, so a band's level is the sum of its bins' powers on the same scale.
 */
import type { RecordingAnalysis } from '../analysis/recording-analysis.ts';
import { pathFrequencyResponse } from '../analysis/path-model.ts';
import { SPECTRUM_UNIT, psdToDbfsPerHz } from '../analysis/welch.ts';
import { REPORT } from '../palette.ts';
import { describeOutputLimit, type SimulationResult } from '../plant/simulate.ts';

export interface ReportAssets {
  /** uPlot's IIFE build (defines the global `uPlot`). */
  uplotJs: string;
  /** uPlot's style sheet. */
  uplotCss: string;
}

export interface PlotSeries {
  label: string;
  values: ArrayLike<number>;
  color: string;
  /** Dash pattern in px, e.g. [6, 4]. */
  dash?: number[];
  /** Draw as bars (category plots); align −1 left of the tick, 1 right of it, 0 centred. */
  bars?: boolean;
  align?: -1 | 0 | 1;
  /** Which y axis: the left (default) or the right one. */
  axis?: 'left' | 'right';
}

export interface PlotSpec {
  title: string;
  /** One sentence on how to read the plot. */
  caption?: string;
  xLabel: string;
  yLabel: string;
  /** Label of the right-hand axis, when a series uses it. */
  y2Label?: string;
  /** 'log' drops x ≤ 0; 'category' plots at 0 … n−1 with `categories` as tick labels. */
  xScale: 'linear' | 'log' | 'category';
  x: ArrayLike<number>;
  categories?: string[];
  series: PlotSeries[];
  /** Fixed y range [min, max] of the left axis (default: automatic). */
  yRange?: [number, number];
  y2Range?: [number, number];
}

export interface ReportTable {
  rows: [string, string][];
}

export interface ReportSection {
  title: string;
  paragraphs?: string[];
  table?: ReportTable;
  /** Markup placed after the table (built by the caller with escapeHtml; e.g. a heat map). */
  html?: string;
  plots?: PlotSpec[];
}

export interface ReportDocument {
  title: string;
  subtitle?: string;
  /** A verdict shown as a coloured banner under the title. */
  verdict?: { kind: 'broadband' | 'predictable-only' | 'unknown'; text: string };
  sections: ReportSection[];
  /** Small print at the foot: tool version, seed, hashes. */
  footer?: string;
}

/** Colours of the report: one per role, the same in every plot (the project's palette, src/palette.ts). */
export const REPORT_COLORS = {
  off: REPORT.off,
  on: REPORT.on,
  reference: REPORT.reference,
  bound: REPORT.bound,
  model: REPORT.model,
  truth: REPORT.truth,
  coherence: REPORT.coherence,
} as const;

/** Points kept per plot (x ≤ 0 dropped on log axes, then every k-th point); time lines are averaged to 4000. */
const MAX_POINTS = 16384;

export function escapeHtml(text: string): string {
  return text.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;').replace(/'/g, '&#39;');
}

/** A number for the embedded JSON: six significant digits; non-finite values become null (a gap). */
function jsonNumber(v: number): number | null {
  return Number.isFinite(v) ? Number(v.toPrecision(6)) : null;
}

/** JSON safe inside a <script> element: no "<" can close it or open a comment. */
export function scriptJson(value: unknown): string {
  return JSON.stringify(value).replace(/</g, '\\u003c').replace(/\u2028/g, '\\u2028').replace(/\u2029/g, '\\u2029');
}

interface EmbeddedPlot {
  id: string;
  title: string;
  xLabel: string;
  yLabel: string;
  y2Label: string | null;
  xScale: PlotSpec['xScale'];
  categories: string[] | null;
  yRange: [number, number] | null;
  y2Range: [number, number] | null;
  x: (number | null)[];
  series: { label: string; color: string; dash: number[] | null; bars: boolean; align: number; axis: 'left' | 'right'; values: (number | null)[] }[];
}

/** Drop x ≤ 0 on a log axis, then keep at most MAX_POINTS points by taking every k-th one. */
function embedPlot(p: PlotSpec, id: string): EmbeddedPlot {
  const keep: number[] = [];
  for (let i = 0; i < p.x.length; i++) if (p.xScale !== 'log' || p.x[i]! > 0) keep.push(i);
  const stride = Math.max(1, Math.ceil(keep.length / MAX_POINTS));
  const idx = stride === 1 ? keep : keep.filter((_, j) => j % stride === 0);
  for (const s of p.series) {
    if (s.values.length !== p.x.length) throw new RangeError(`plot "${p.title}": series "${s.label}" has ${s.values.length} values for ${p.x.length} x points`);
  }
  return {
    id,
    title: p.title,
    xLabel: p.xLabel,
    yLabel: p.yLabel,
    y2Label: p.y2Label ?? null,
    xScale: p.xScale,
    categories: p.categories ?? null,
    yRange: p.yRange ?? null,
    y2Range: p.y2Range ?? null,
    x: idx.map((i) => jsonNumber(p.x[i]!)),
    series: p.series.map((s) => ({
      label: s.label,
      color: s.color,
      dash: s.dash ?? null,
      bars: s.bars ?? false,
      align: s.align ?? 0,
      axis: s.axis ?? 'left',
      values: idx.map((i) => jsonNumber(s.values[i]!)),
    })),
  };
}

const STYLE = `
:root { --ink: ${REPORT.ink}; --muted: ${REPORT.muted}; --line: ${REPORT.line}; --paper: ${REPORT.paper}; --wash: ${REPORT.wash}; }
* { box-sizing: border-box; }
body { margin: 0; font: 15px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; color: var(--ink); background: var(--wash); }
main { max-width: 1180px; margin: 0 auto; padding: 24px 20px 48px; }
h1 { font-size: 24px; margin: 0 0 4px; }
h2 { font-size: 18px; margin: 32px 0 8px; padding-bottom: 4px; border-bottom: 1px solid var(--line); }
.subtitle { color: var(--muted); margin: 0 0 16px; }
.verdict { border-left: 6px solid; padding: 10px 14px; margin: 12px 0 8px; background: var(--paper); border-radius: 4px; }
.verdict.broadband { border-color: ${REPORT.verdictBroadband}; }
.verdict.predictable-only { border-color: ${REPORT.verdictPredictable}; }
.verdict.unknown { border-color: ${REPORT.verdictUnknown}; }
.verdict b { text-transform: uppercase; letter-spacing: 0.04em; font-size: 12px; display: block; color: var(--muted); }
table.facts { border-collapse: collapse; background: var(--paper); min-width: 50%; }
table.facts td { padding: 4px 14px 4px 8px; border-bottom: 1px solid var(--line); vertical-align: top; }
table.facts td:first-child { color: var(--muted); white-space: nowrap; }
.plots { display: grid; grid-template-columns: repeat(auto-fit, minmax(520px, 1fr)); gap: 16px; margin-top: 12px; }
figure { margin: 0; background: var(--paper); border: 1px solid var(--line); border-radius: 6px; padding: 10px 10px 6px; min-width: 0; }
figcaption { font-weight: 600; margin-bottom: 2px; }
figure p { margin: 0 0 6px; color: var(--muted); font-size: 13px; }
.plot { width: 100%; min-height: 300px; }
footer { margin-top: 40px; color: var(--muted); font-size: 12px; word-break: break-all; }
noscript { display: block; padding: 12px; background: ${REPORT.notice}; }
@media (max-width: 600px) { .plots { grid-template-columns: 1fr; } }
`;

/**
 * The inline script: reads the embedded JSON and draws each plot with uPlot at its container's width, redrawn
 * on resize. Log axes label 1-2-5 steps only; category axes label bands.
 */
const CLIENT = `
(function () {
  var data = JSON.parse(document.getElementById('report-data').textContent);
  var charts = [];
  function hz(v) { return v >= 1000 ? (v / 1000) + 'k' : String(v); }
  function logValues(u, splits) {
    return splits.map(function (v) {
      var m = v / Math.pow(10, Math.floor(Math.log10(v) + 1e-9));
      return Math.abs(m - 1) < 1e-6 || Math.abs(m - 2) < 1e-6 || Math.abs(m - 5) < 1e-6 ? hz(+v.toPrecision(3)) : '';
    });
  }
  function build(p) {
    var el = document.getElementById(p.id);
    var cats = p.categories;
    var x = p.xScale === 'category' ? p.x.map(function (_, i) { return i; }) : p.x;
    var xScale = p.xScale === 'log' ? { time: false, distr: 3, log: 10 } : { time: false };
    if (p.xScale === 'category') xScale.range = function (u, mn, mx) { return [-0.6, x.length - 0.4]; };
    var scales = { x: xScale, y: p.yRange ? { range: p.yRange } : { auto: true } };
    var axes = [
      { label: p.xLabel, values: p.xScale === 'log' ? logValues : cats ? function (u, s) { return s.map(function (i) { return Number.isInteger(i) && cats[i] !== undefined ? cats[i] : ''; }); } : undefined,
        incrs: cats ? [1, 2, 3, 4, 5, 10] : undefined, space: cats ? 34 : 50 },
      { label: p.yLabel, scale: 'y', size: 60 }
    ];
    var hasRight = p.series.some(function (s) { return s.axis === 'right'; });
    if (hasRight) {
      scales.y2 = p.y2Range ? { range: p.y2Range } : { auto: true };
      axes.push({ label: p.y2Label || '', scale: 'y2', side: 1, grid: { show: false }, size: 60 });
    }
    var series = [{ label: p.xLabel, value: function (u, v) { return v == null ? '' : cats ? (cats[v] || '') : (+v.toPrecision(5)); } }];
    p.series.forEach(function (s) {
      var o = { label: s.label, stroke: s.color, width: 1.6, scale: s.axis === 'right' ? 'y2' : 'y', points: { show: false },
        value: function (u, v) { return v == null ? '—' : v.toFixed(2); } };
      if (s.dash) o.dash = s.dash;
      if (s.bars) {
        o.paths = uPlot.paths.bars({ size: [0.42, 40], align: s.align });
        o.fill = s.color + 'cc';
        o.fillTo = function (u) { return u.scales[o.scale].min; };
      }
      series.push(o);
    });
    var opts = { width: Math.max(320, el.clientWidth), height: 300, scales: scales, axes: axes, series: series,
      cursor: { drag: { x: true, y: false } }, legend: { live: true } };
    var cols = [x].concat(p.series.map(function (s) { return s.values; }));
    var u = new uPlot(opts, cols, el);
    charts.push({ u: u, el: el });
  }
  data.plots.forEach(build);
  var pending = 0;
  window.addEventListener('resize', function () {
    clearTimeout(pending);
    pending = setTimeout(function () {
      charts.forEach(function (c) { c.u.setSize({ width: Math.max(320, c.el.clientWidth), height: 300 }); });
    }, 100);
  });
})();
`;

/** The whole page. Throws if a plot's series and x lengths differ. */
export function renderReportHtml(doc: ReportDocument, assets: ReportAssets): string {
  const plots: EmbeddedPlot[] = [];
  const body: string[] = [];
  body.push(`<h1>${escapeHtml(doc.title)}</h1>`);
  if (doc.subtitle) body.push(`<p class="subtitle">${escapeHtml(doc.subtitle)}</p>`);
  if (doc.verdict) {
    const label = { broadband: 'broadband control possible', 'predictable-only': 'only predictable noise can be cancelled', unknown: 'causality unknown' }[doc.verdict.kind];
    body.push(`<div class="verdict ${doc.verdict.kind}"><b>${escapeHtml(label)}</b>${escapeHtml(doc.verdict.text)}</div>`);
  }
  doc.sections.forEach((section) => {
    body.push(`<section><h2>${escapeHtml(section.title)}</h2>`);
    for (const para of section.paragraphs ?? []) body.push(`<p>${escapeHtml(para)}</p>`);
    if (section.table) {
      body.push('<table class="facts">');
      for (const [k, v] of section.table.rows) body.push(`<tr><td>${escapeHtml(k)}</td><td>${escapeHtml(v)}</td></tr>`);
      body.push('</table>');
    }
    if (section.html) body.push(section.html);
    if (section.plots?.length) {
      body.push('<div class="plots">');
      for (const p of section.plots) {
        const id = `plot-${plots.length}`;
        plots.push(embedPlot(p, id));
        body.push(`<figure><figcaption>${escapeHtml(p.title)}</figcaption>${p.caption ? `<p>${escapeHtml(p.caption)}</p>` : ''}<div class="plot" id="${id}"></div></figure>`);
      }
      body.push('</div>');
    }
    body.push('</section>');
  });
  if (doc.footer) body.push(`<footer>${escapeHtml(doc.footer)}</footer>`);
  // The library text goes in as is; "</script" cannot occur in it unescaped without ending the element early.
  const js = assets.uplotJs.replace(/<\/script/gi, '<\\/script');
  return `<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>${escapeHtml(doc.title)}</title>
<style>${assets.uplotCss}</style>
<style>${STYLE}</style>
</head>
<body>
<main>
<noscript>The plots need JavaScript; the figures above each plot are in the text.</noscript>
${body.join('\n')}
</main>
<script type="application/json" id="report-data">${scriptJson({ plots })}</script>
<script>${js}</script>
<script>${CLIENT}</script>
</body>
</html>
`;
}

// ---------------------------------------------------------------------------------------------------------
// Report content

const fmt = (v: number | null | undefined, digits = 1, unit = ''): string =>
  v === null || v === undefined || !Number.isFinite(v) ? 'n/a' : `${v.toFixed(digits)}${unit ? ` ${unit}` : ''}`;

/** The project's spectrum scale (welch.ts): 10·log10(2·PSD), AES17 dBFS per hertz. */
function psdDb(psd: ArrayLike<number>): Float64Array {
  return Float64Array.from({ length: psd.length }, (_, k) => psdToDbfsPerHz(psd[k]!));
}

function bandLabel(nominalHz: number): string {
  return nominalHz >= 1000 ? `${+(nominalHz / 1000).toPrecision(3)}k` : String(nominalHz);
}

function weightingName(w: string): string {
  return w === 'Z' ? 'unweighted (Z)' : `${w}-weighted`;
}

/** Plots shared by both reports: spectra, coherence/bound, band levels. */
function analysisPlots(a: RecordingAnalysis, labels: { off: string; on: string }, withReference: boolean): PlotSpec[] {
  const f = a.spectra.frequencies;
  const plots: PlotSpec[] = [];
  const spectra: PlotSeries[] = [];
  if (withReference) spectra.push({ label: 'reference mic', values: psdDb(a.spectra.referencePsd), color: REPORT_COLORS.reference });
  spectra.push({ label: labels.off, values: psdDb(a.spectra.errorOffPsd), color: REPORT_COLORS.off });
  if (a.spectra.errorOnPsd) spectra.push({ label: labels.on, values: psdDb(a.spectra.errorOnPsd), color: REPORT_COLORS.on });
  plots.push({
    title: 'Power spectral density',
    caption: `Welch's method, Hann window, ${a.resolution.coherenceResolutionHz.toFixed(2)} Hz resolution, unweighted.`,
    xLabel: 'frequency (Hz)',
    yLabel: SPECTRUM_UNIT,
    xScale: 'log',
    x: f,
    series: spectra,
  });
  const boundSeries: PlotSeries[] = [{ label: 'coherence bound', values: a.spectra.boundDb, color: REPORT_COLORS.bound }];
  if (a.spectra.errorOnPsd) {
    const off = a.spectra.errorOffPsd;
    const on = a.spectra.errorOnPsd;
    boundSeries.push({ label: 'achieved attenuation', values: Float64Array.from({ length: f.length }, (_, k) => 10 * Math.log10(off[k]! / on[k]!)), color: REPORT_COLORS.on });
  }
  plots.push({
    title: 'Coherence bound per frequency',
    caption:
      'What the best fixed (time-invariant) linear filter from the reference could remove at each frequency, −10·log10(1 − γ²), from the reference/error coherence with control off. ' +
      'An adaptive filter that follows the noise as it changes can do better than this bound.',
    xLabel: 'frequency (Hz)',
    yLabel: 'dB',
    xScale: 'log',
    x: f,
    series: boundSeries,
  });
  plots.push({
    title: 'Coherence between reference and error microphone',
    caption: `γ² after removing the estimated delay; ${a.resolution.coherenceSegments} segments averaged (unrelated signals read about ${(1 / a.resolution.coherenceSegments).toFixed(3)}).`,
    xLabel: 'frequency (Hz)',
    yLabel: 'γ²',
    xScale: 'log',
    x: f,
    yRange: [0, 1],
    series: [{ label: 'γ²', values: a.spectra.coherence, color: REPORT_COLORS.coherence }],
  });
  const bandSeries: PlotSeries[] = [{ label: labels.off, values: a.bands.map((b) => b.offDb), color: REPORT_COLORS.off, bars: true, align: a.bands[0]?.onDb !== undefined ? -1 : 0 }];
  if (a.bands.length && a.bands[0]!.onDb !== undefined) bandSeries.push({ label: labels.on, values: a.bands.map((b) => b.onDb!), color: REPORT_COLORS.on, bars: true, align: 1 });
  plots.push({
    title: `${a.fraction === 3 ? 'One-third-octave' : 'Octave'} band levels`,
    caption: `Bands with IEC 61260-1:2014 centre frequencies and edges, synthesised by summing FFT bins (not measured with IEC 61260-1 filters); ${weightingName(a.weighting)}, dBFS (AES17).`,
    xLabel: 'band (Hz)',
    yLabel: 'dBFS',
    xScale: 'category',
    categories: a.bands.map((b) => bandLabel(b.nominalHz)),
    x: a.bands.map((_, i) => i),
    series: bandSeries,
  });
  return plots;
}

function modelPlots(taps: ArrayLike<number>, sampleRate: number, truth: ArrayLike<number> | null, withPhase: boolean, bulkDelayMs: number | null = null): PlotSpec[] {
  const n = Math.max(taps.length, truth?.length ?? 0);
  const t = Float64Array.from({ length: n }, (_, i) => (1000 * i) / sampleRate);
  const pad = (v: ArrayLike<number>) => Float64Array.from({ length: n }, (_, i) => (i < v.length ? v[i]! : Number.NaN));
  const impulse: PlotSeries[] = [{ label: 'model', values: pad(taps), color: REPORT_COLORS.model }];
  if (truth) impulse.push({ label: 'true path', values: pad(truth), color: REPORT_COLORS.truth, dash: [6, 4] });
  const size = 2 ** Math.max(10, Math.ceil(Math.log2(2 * n)));
  const r = pathFrequencyResponse(taps, sampleRate, size);
  const mag: PlotSeries[] = [{ label: 'model', values: r.magnitudeDb, color: REPORT_COLORS.model }];
  if (truth) mag.push({ label: 'true path', values: pathFrequencyResponse(truth, sampleRate, size).magnitudeDb, color: REPORT_COLORS.truth, dash: [6, 4] });
  const plots: PlotSpec[] = [
    { title: 'Secondary-path model: impulse response', caption: 'Loudspeaker drive to error microphone, audio I/O latency included.', xLabel: 'time (ms)', yLabel: 'amplitude', xScale: 'linear', x: t, series: impulse },
    { title: 'Secondary-path model: magnitude', xLabel: 'frequency (Hz)', yLabel: 'dB', xScale: 'log', x: r.frequencyHz, series: mag },
  ];
  if (withPhase) {
    // The bulk delay alone turns the phase by −360° per kHz per ms; with it added back, what is left is the
    // phase of the path's own response, which is what a model error of a few tens of degrees shows in.
    const phaseDeg = r.unwrappedPhaseRad.map((p) => (p * 180) / Math.PI);
    const series: PlotSeries[] = [{ label: 'model', values: phaseDeg, color: REPORT_COLORS.model, axis: 'left' }];
    if (bulkDelayMs !== null) {
      series.push({
        label: `with the ${bulkDelayMs.toFixed(2)} ms bulk delay removed`,
        values: phaseDeg.map((p, k) => p + 360 * r.frequencyHz[k]! * (bulkDelayMs / 1000)),
        color: REPORT_COLORS.reference,
        axis: 'right',
      });
    }
    plots.push({
      title: 'Secondary-path model: phase',
      caption: 'Unwrapped (left axis); the bulk delay turns it by −360° per kHz per ms of delay. Right axis: the phase left once the bulk delay is removed.',
      xLabel: 'frequency (Hz)',
      yLabel: 'degrees',
      y2Label: 'degrees, bulk delay removed',
      xScale: 'log',
      x: r.frequencyHz,
      series,
    });
  }
  return plots;
}

function causalityRows(a: RecordingAnalysis): [string, string][] {
  const c = a.causality;
  return [
    ['reference → error delay', c.primaryDelayMs === null ? 'not found (no clear correlation peak)' : `${c.primaryDelayMs.toFixed(2)} ms`],
    ['secondary-path delay', c.secondaryDelayMs === null ? 'unknown (no model)' : `${c.secondaryDelayMs.toFixed(2)} ms`],
    ['causality margin', c.marginMs === null ? 'n/a' : `${c.marginMs.toFixed(2)} ms`],
  ];
}

function notesSection(notes: Record<string, string>): ReportSection | null {
  const entries = Object.entries(notes);
  return entries.length ? { title: 'Notes', paragraphs: entries.map(([k, v]) => `${k}: ${v}`) } : null;
}

/**
 * What the simulation report needs: the simulator's result figures plus what `ancbench simulate` adds to them
 * (its SimulateSummary satisfies this; io/ does not import cli/, so the shape is named here).
 */
export type SimulationReportSummary = Pick<
  SimulationResult,
  | 'algorithm' | 'sampleRate' | 'durationS' | 'attenuationDb' | 'convergenceS' | 'wienerBoundDb' | 'wienerBoundIsBound'
  | 'peakOutputDbfs' | 'diverged' | 'divergenceReasons' | 'errorOffDbfs' | 'errorOnDbfs' | 'notes'
> & Partial<Pick<SimulationResult, 'outputLimit' | 'amplified'>> & {
  scenario: string;
  name: string | null;
  outputCeilingDbfs: number;
  stamp?: { version: string; seed: number; scenarioSha256: string };
};

/** What it needs from the simulation result itself. */
export type SimulationReportResult = Pick<SimulationResult, 'sampleRate' | 'durationS' | 'secondaryPathModel' | 'timeline'>;

/** Average consecutive power values (given in dB) down to at most `max` points. */
function thinLevels(timeS: ArrayLike<number>, levels: ArrayLike<number>[], max = 4000): { t: Float64Array; v: Float64Array[] } {
  const n = timeS.length;
  const k = Math.max(1, Math.ceil(n / max));
  const m = Math.ceil(n / k);
  const t = new Float64Array(m);
  const v = levels.map(() => new Float64Array(m));
  for (let j = 0; j < m; j++) {
    const from = j * k;
    const to = Math.min(n, from + k);
    t[j] = timeS[to - 1]!;
    levels.forEach((l, s) => {
      let p = 0;
      for (let i = from; i < to; i++) p += Math.pow(10, l[i]! / 10);
      v[s]![j] = 10 * Math.log10(p / (to - from));
    });
  }
  return { t, v };
}

export interface SimulationReportOptions {
  /** The true secondary path, drawn beside the model. */
  trueSecondaryPath?: ArrayLike<number>;
  /**
   * The reference microphone of the control-off run. The recorded `reference` is the control-on run's, which
   * with a feedback path also holds the loudspeaker; the coherence with the control-off error wants this one.
   */
  referenceOff?: Float32Array;
  /** Why the spectral analysis is missing, when `analysis` is null. */
  analysisSkipped?: string;
}

/** The report for `ancbench simulate --out`. `analysis` is analyzeRecordings on the run's signals. */
export function renderSimulationReport(
  s: SimulationReportSummary,
  r: SimulationReportResult,
  analysis: RecordingAnalysis | null,
  assets: ReportAssets,
  options: SimulationReportOptions = {},
): string {
  const thin = thinLevels(r.timeline.timeS, [r.timeline.offDbfs, r.timeline.onDbfs]);
  const sections: ReportSection[] = [
    {
      title: 'Result',
      table: {
        rows: [
          ['attenuation', `${fmt(s.attenuationDb, 1, 'dB')} (error mic, last 25 % of the run, unweighted)`],
          ['error level', `${fmt(s.errorOffDbfs, 1)} dBFS off → ${fmt(s.errorOnDbfs, 1)} dBFS on`],
          ['convergence', s.convergenceS === null ? 'not reached' : `${s.convergenceS.toFixed(2)} s`],
          ['Wiener bound', `${fmt(s.wienerBoundDb, 1, 'dB')}${s.wienerBoundIsBound ? '' : ' (not a bound: the noise or the plant changes during the run)'}`],
          ...(analysis
            ? ([
                ['coherence bound', `${fmt(analysis.coherenceBoundDb, 1, 'dB')} over ${analysis.bandRangeHz[0].toFixed(0)}–${analysis.bandRangeHz[1].toFixed(0)} Hz`],
                ...causalityRows(analysis),
              ] as [string, string][])
            : []),
          ['peak output', `${fmt(s.peakOutputDbfs, 1)} dBFS (ceiling ${s.outputCeilingDbfs} dBFS)`],
          ...(s.outputLimit ? ([['output limit', describeOutputLimit(s.outputLimit)]] as [string, string][]) : []),
          ...(s.amplified ? ([['amplified', 'yes: control on is more than 1 dB louder than control off (overall or at a tone)']] as [string, string][]) : []),
          ['diverged', s.diverged ? `yes: ${s.divergenceReasons.join('; ')}` : 'no'],
          ['controller', `${s.algorithm}, ${s.sampleRate} Hz, ${s.durationS.toFixed(2)} s`],
        ],
      },
    },
    {
      title: 'Over time',
      plots: [
        {
          title: 'Error microphone level',
          caption: 'AES17 RMS level over a trailing 100 ms window, the same seed with control off and on.',
          xLabel: 'time (s)',
          yLabel: 'dBFS',
          xScale: 'linear',
          x: thin.t,
          series: [
            { label: 'control off', values: thin.v[0]!, color: REPORT_COLORS.off },
            { label: 'control on', values: thin.v[1]!, color: REPORT_COLORS.on },
          ],
        },
      ],
    },
    ...(analysis ? [{ title: 'Spectra and limits (last 25 % of the run)', plots: analysisPlots(analysis, { off: 'control off', on: 'control on' }, false) }] : []),
    { title: 'Secondary-path model used by the controller', plots: modelPlots(r.secondaryPathModel, r.sampleRate, options.trueSecondaryPath ?? null, false) },
  ];
  const notes = notesSection({ ...s.notes, ...(analysis ? prefixed('analysis', analysis.notes) : { analysis: options.analysisSkipped ?? 'not run' }) });
  if (notes) sections.push(notes);
  return renderReportHtml(
    {
      title: s.name ?? 'Simulation report',
      subtitle: s.scenario,
      ...(analysis ? { verdict: { kind: analysis.causality.verdict, text: analysis.causality.sentence } } : {}),
      sections,
      ...(s.stamp ? { footer: `ancbench ${s.stamp.version} · seed ${s.stamp.seed} · scenario SHA-256 ${s.stamp.scenarioSha256}` } : {}),
    },
    assets,
  );
}

function prefixed(prefix: string, notes: Record<string, string>): Record<string, string> {
  return Object.fromEntries(Object.entries(notes).map(([k, v]) => [`${prefix} ${k}`, v]));
}

export interface AnalysisReportMeta {
  /** What was analysed: file and channel per role. */
  inputs: [string, string][];
  footer?: string;
}

/** The report for `ancbench analyze --out`. */
export function renderAnalysisReport(a: RecordingAnalysis, meta: AnalysisReportMeta, assets: ReportAssets): string {
  const overall = a.overall;
  const rows: [string, string][] = [
    ...meta.inputs,
    ['sample rate, length', `${a.sampleRate} Hz, ${a.durationS.toFixed(2)} s`],
    ['error level, control off', `${fmt(overall.offDb, 1)} dBFS ${weightingName(a.weighting)}, ${a.bandRangeHz[0].toFixed(0)}–${a.bandRangeHz[1].toFixed(0)} Hz`],
  ];
  if (overall.onDb !== undefined) {
    rows.push(['error level, control on', `${fmt(overall.onDb, 1)} dBFS`]);
    rows.push(['attenuation', fmt(overall.attenuationDb, 1, 'dB')]);
  }
  rows.push(['coherence bound', `${fmt(a.coherenceBoundDb, 1, 'dB')} (what the best fixed linear filter from the reference could remove, before causality; an adaptive filter can beat it)`]);
  rows.push(...causalityRows(a));
  const sections: ReportSection[] = [
    { title: 'Summary', table: { rows } },
    { title: 'Spectra and limits', plots: analysisPlots(a, { off: 'error, control off', on: 'error, control on' }, true) },
  ];
  if (a.model) sections.push({ title: 'Secondary-path model', plots: modelPlots(a.model.taps, a.sampleRate, null, true, a.model.delayMs) });
  const notes = notesSection(a.notes);
  if (notes) sections.push(notes);
  return renderReportHtml(
    {
      title: 'Recording analysis',
      subtitle: 'Will cancellation work here, and how well?',
      verdict: { kind: a.causality.verdict, text: a.causality.sentence },
      sections,
      ...(meta.footer ? { footer: meta.footer } : {}),
    },
    assets,
  );
}
