/**
 * <ancb-plot>: a uPlot chart in a card. The display loop hands it data with `setData`; the element
 * never re-renders for data. Colours come from the theme's CSS variables, read when the chart is
 * built (call `themeChanged()` after switching themes).
 *
 * Properties: heading, config (axes and series), summary (text for assistive technology, also shown
 * in small type under the chart), placeholder (shown instead of the chart while there is no data).
 */
import { LitElement, css, html, unsafeCSS, type PropertyValues } from 'lit';
import uPlot from 'uplot';
import uplotCss from 'uplot/dist/uPlot.min.css?inline';
import { shared, themeColor } from './theme.ts';

const LOG_TICKS = [10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10000, 20000, 50000, 100000];

/** Height of the plotting area, px. */
export const PLOT_HEIGHT_PX = 240;

export interface PlotSeries {
  label: string;
  /** Theme variable holding the colour, e.g. '--ancb-series-on'. */
  colorVar: string;
  width?: number;
  dash?: number[];
  /** Unit shown in the legend value. */
  unit?: string;
}

export interface PlotConfig {
  xLabel: string;
  yLabel: string;
  xLog?: boolean;
  /** Fixed y range; omitted: auto. */
  yRange?: [number, number];
  xRange?: [number, number];
  series: PlotSeries[];
  /** Decimals for legend values. */
  decimals?: number;
}

export class AncbPlot extends LitElement {
  static override properties = {
    heading: {},
    config: { attribute: false },
    summary: {},
    placeholder: {},
  };

  static override styles = [
    unsafeCSS(uplotCss),
    shared,
    css`
      :host {
        display: block;
        min-width: 0;
      }
      .card {
        height: 100%;
        box-sizing: border-box;
        display: flex;
        flex-direction: column;
      }
      .chart {
        min-height: 240px;
        position: relative;
        overflow: hidden;
      }
      .placeholder {
        position: absolute;
        inset: 0;
        display: grid;
        place-items: center;
        text-align: center;
        padding: 1rem;
        color: var(--ancb-muted);
      }
      .u-legend {
        font-size: 0.85rem;
        color: var(--ancb-fg);
      }
      .u-legend .u-marker {
        width: 1.2em;
        height: 0.35em;
      }
      .summary {
        font-size: 0.8rem;
        color: var(--ancb-muted);
        margin: 0.2rem 0 0;
        min-height: 1em;
      }
    `,
  ];

  declare heading: string;
  declare config: PlotConfig | null;
  declare summary: string;
  declare placeholder: string;
  private chart: uPlot | null = null;
  private data: uPlot.AlignedData | null = null;
  private resize: ResizeObserver | null = null;

  constructor() {
    super();
    this.heading = '';
    this.config = null;
    this.summary = '';
    this.placeholder = '';
  }

  private get box(): HTMLElement | null {
    return this.renderRoot.querySelector('.chart');
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    this.resize?.disconnect();
    this.resize = null;
    this.chart?.destroy();
    this.chart = null;
  }

  protected override firstUpdated(): void {
    this.resize = new ResizeObserver(() => this.fit());
    if (this.box) this.resize.observe(this.box);
  }

  protected override updated(changed: PropertyValues): void {
    if (changed.has('config')) this.rebuild();
  }

  themeChanged(): void {
    this.rebuild();
  }

  /** New data: x first, then one array per series (nulls leave gaps). */
  setData(data: uPlot.AlignedData): void {
    this.data = data;
    if (!this.chart) this.rebuild();
    else this.chart.setData(data, true);
  }

  private readonly legendNotes = new Map<number, string>();

  /**
   * A note after a series' legend label (null removes it): a series with no data says so, rather than
   * listing a curve that is not drawn (the live spectrum before any control-off audio exists).
   */
  setLegendNote(series: number, note: string | null): void {
    if (note === null) this.legendNotes.delete(series);
    else this.legendNotes.set(series, note);
    this.applyLegendNotes();
  }

  private applyLegendNotes(): void {
    const cfg = this.config;
    const rows = this.chart?.root.querySelectorAll('.u-legend .u-series');
    if (!cfg || !rows) return;
    cfg.series.forEach((sr, i) => {
      const label = rows[i + 1]?.querySelector('.u-label');
      if (!label) return;
      const note = this.legendNotes.get(i);
      const text = note ? `${sr.label} (${note})` : sr.label;
      if (label.textContent !== text) label.textContent = text;
    });
  }

  /** Chart size: the box's width, a fixed plotting height (the legend adds below it). */
  private size(): { width: number; height: number } {
    const b = this.box;
    return { width: Math.max(200, Math.floor(b?.clientWidth ?? 300)), height: PLOT_HEIGHT_PX };
  }

  private lastWidth = 0;

  private fit(): void {
    const s = this.size();
    // react to width only: the chart's own height must not feed back into its size
    if (s.width === this.lastWidth) return;
    this.lastWidth = s.width;
    if (this.chart) this.chart.setSize(s);
    else this.rebuild();
  }

  private rebuild(): void {
    const box = this.box;
    const cfg = this.config;
    this.chart?.destroy();
    this.chart = null;
    if (!box || !cfg || !this.data) return;
    const fg = themeColor('--ancb-fg');
    const grid = themeColor('--ancb-grid');
    const font = `14px ${themeColor('--ancb-font')}`;
    const axis = (label: string): uPlot.Axis => ({ label, stroke: fg, grid: { stroke: grid, width: 1 }, ticks: { stroke: grid, width: 1 }, font, labelFont: font, labelSize: 22 });
    const dec = cfg.decimals ?? 1;
    // log-frequency axis: ticks at 1-2-5 steps, labelled 100, 1k, 10k
    const logTicks = (_u: uPlot, _i: number, min: number, max: number): number[] => LOG_TICKS.filter((v) => v >= min * 0.999 && v <= max * 1.001);
    const logLabels = (_u: uPlot, splits: number[]): string[] => splits.map((v) => (v == null ? '' : v >= 1000 ? `${v / 1000}k` : String(v)));
    // keep every 1-2-5 tick (uPlot's log filter would keep only the decades)
    const keepAll = (_u: uPlot, splits: number[]): number[] => splits;
    const xAxis: uPlot.Axis = cfg.xLog ? { ...axis(cfg.xLabel), splits: logTicks, values: logLabels, filter: keepAll } : axis(cfg.xLabel);
    const opts: uPlot.Options = {
      ...this.size(),
      legend: { show: true, live: true },
      cursor: { drag: { x: false, y: false } },
      scales: {
        // x spans the data exactly (a log axis would otherwise round out to whole decades)
        x: { time: false, ...(cfg.xLog ? { distr: 3, log: 10 } : {}), range: cfg.xRange ?? ((_u: uPlot, min: number, max: number): uPlot.Range.MinMax => [min, max]) },
        y: cfg.yRange ? { range: cfg.yRange } : { auto: true },
      },
      axes: [xAxis, { ...axis(cfg.yLabel), size: 60 }],
      series: [
        { label: cfg.xLabel, value: (_u, v) => (v == null ? '—' : v.toFixed(cfg.xLog ? 0 : 1)) },
        ...cfg.series.map((s) => ({
          label: s.label,
          stroke: themeColor(s.colorVar),
          width: s.width ?? 2,
          ...(s.dash ? { dash: s.dash } : {}),
          points: { show: false },
          value: (_u: uPlot, v: number | null) => (v == null ? '—' : `${v.toFixed(dec)}${s.unit ? ' ' + s.unit : ''}`),
        })),
      ],
    };
    this.chart = new uPlot(opts, this.data, box);
    this.applyLegendNotes();
  }

  protected override render(): unknown {
    const showPlaceholder = this.placeholder !== '';
    return html`<section class="card" aria-label=${this.heading}>
      <h2>${this.heading}</h2>
      <div class="chart" role="img" aria-label=${`${this.heading}. ${this.summary}`}>
        ${showPlaceholder ? html`<div class="placeholder">${this.placeholder}</div>` : ''}
      </div>
      <p class="summary">${this.summary}</p>
    </section>`;
  }
}

if (!customElements.get('ancb-plot')) customElements.define('ancb-plot', AncbPlot);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-plot': AncbPlot;
  }
}
