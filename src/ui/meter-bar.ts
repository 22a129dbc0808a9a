/**
 * <ancb-meter>: one horizontal level bar on a canvas, with its reading as text.
 *
 * The display loop calls `show(value, peak, cap)` every animation frame; the bar redraws on the
 * canvas and the text (and the `data-value` attribute and aria-valuenow) change at most eight times
 * a second, so the number stays readable. No Lit re-render happens per frame.
 *
 * dB SPL appears only when `splOffsetDb` is set from a calibration of that channel; without one the
 * meter says so and never shows an SPL figure. With one, the SPL reading (dBFS + offset) is shown
 * under the bar with `splPrefix` (e.g. "≤ " for an upper bound) and `splNote` (the frequency range
 * the calibration holds for); it is in `data-spl`.
 *
 * Levels (unit dBFS) have a floor: below LEVEL_FLOOR_DBFS (silence included) the reading is
 * "below −120" and `data-value` is empty; other units (dB of gain reduction) show any finite value.
 *
 * Attributes: label, unit, min, max, channel (a name for tests and styling).
 * Parts: `bar` (canvas), `value` (reading).
 */
import { LitElement, css, html, type PropertyValues } from 'lit';
import { shared, themeColor } from './theme.ts';
import { LEVEL_FLOOR_DBFS, fmtDb, fmtLevel } from './format.ts';

const TEXT_INTERVAL_MS = 125;

export class AncbMeter extends LitElement {
  static override properties = {
    label: {},
    unit: {},
    min: { type: Number },
    max: { type: Number },
    channel: { reflect: true },
    splOffsetDb: { attribute: false },
    splPrefix: {},
    splNote: {},
    note: {},
  };
  static override styles = [
    shared,
    css`
      :host {
        display: grid;
        grid-template-columns: minmax(7.5rem, 9rem) 1fr minmax(8.5rem, auto);
        align-items: center;
        gap: 0.6rem;
      }
      .label {
        font-weight: 600;
      }
      canvas {
        width: 100%;
        height: 1.6rem;
        border-radius: 4px;
        display: block;
      }
      .value {
        font-family: var(--ancb-mono);
        font-size: 1.2rem;
        text-align: right;
        white-space: nowrap;
      }
      .sub {
        grid-column: 2 / 4;
        font-size: 0.8rem;
        color: var(--ancb-muted);
        margin-top: -0.3rem;
      }
    `,
  ];

  declare label: string;
  declare unit: string;
  declare min: number;
  declare max: number;
  declare channel: string;
  /** dB SPL = dBFS + splOffsetDb, from a calibration of this channel; null: uncalibrated. */
  declare splOffsetDb: number | null;
  /** Text before the SPL reading ('' or '≤ ' for a bound). */
  declare splPrefix: string;
  /** Where the SPL reading holds (frequency range of the calibration). */
  declare splNote: string;
  /** A note under the bar (e.g. what the peak marker means). */
  declare note: string;
  private lastText = 0;
  private colors: { bar: string; track: string; peak: string; cap: string } | null = null;
  private resize: ResizeObserver | null = null;
  private value = NaN;
  private peak = NaN;
  private cap = NaN;

  /** The number the reading currently shows (NaN when none). */
  shownValue = NaN;

  constructor() {
    super();
    this.label = '';
    this.unit = 'dBFS';
    this.min = -90;
    this.max = 0;
    this.channel = '';
    this.splOffsetDb = null;
    this.splPrefix = '';
    this.splNote = '';
    this.note = '';
  }

  private get canvas(): HTMLCanvasElement | null {
    return this.renderRoot.querySelector('canvas');
  }

  private get valueEl(): HTMLElement | null {
    return this.renderRoot.querySelector('.value');
  }

  private get splEl(): HTMLElement | null {
    return this.renderRoot.querySelector('.spl');
  }

  override connectedCallback(): void {
    super.connectedCallback();
    this.setAttribute('role', 'meter');
    this.setAttribute('aria-valuemin', String(this.min));
    this.setAttribute('aria-valuemax', String(this.max));
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    this.resize?.disconnect();
    this.resize = null;
  }

  protected override firstUpdated(_changed: PropertyValues): void {
    this.resize = new ResizeObserver(() => this.fitCanvas());
    if (this.canvas) this.resize.observe(this.canvas);
    this.fitCanvas();
  }

  protected override updated(changed: PropertyValues): void {
    if (changed.has('label')) this.setAttribute('aria-label', `${this.label} (${this.unit})`);
    // the readings' text is set outside Lit (8 times a second, in show()), so their elements carry no
    // bindings a re-render could trip over: fill them after each render
    const v = this.valueEl;
    if (v && !v.textContent) v.textContent = `${this.reading(this.value)} ${this.unit}`;
    if (changed.has('splOffsetDb') || changed.has('splPrefix')) this.showSpl(this.value);
  }

  /** Forget cached theme colours (call after a theme change). */
  themeChanged(): void {
    this.colors = null;
    this.draw();
  }

  private fitCanvas(): void {
    const c = this.canvas;
    if (!c) return;
    const dpr = globalThis.devicePixelRatio || 1;
    const w = Math.max(1, Math.round(c.clientWidth * dpr));
    const h = Math.max(1, Math.round(c.clientHeight * dpr));
    if (c.width !== w || c.height !== h) {
      c.width = w;
      c.height = h;
    }
    this.draw();
  }

  /** The reading's text: a level keeps to its floor; other units show the figure. */
  private reading(v: number): string {
    return this.unit === 'dBFS' ? fmtLevel(v) : fmtDb(v);
  }

  /** Show a reading (in this meter's unit), an optional peak marker and an optional cap marker. */
  show(value: number, peak = NaN, cap = NaN, nowMs = performance.now()): void {
    this.value = value;
    this.peak = peak;
    this.cap = cap;
    this.draw();
    if (nowMs - this.lastText >= TEXT_INTERVAL_MS) {
      this.lastText = nowMs;
      const floored = this.unit === 'dBFS' && value < LEVEL_FLOOR_DBFS;
      this.shownValue = Number.isFinite(value) && !floored ? Math.round(value * 10) / 10 : NaN;
      const text = `${this.reading(value)} ${this.unit}`;
      if (this.valueEl && this.valueEl.textContent !== text) this.valueEl.textContent = text;
      const data = Number.isFinite(this.shownValue) ? String(this.shownValue) : '';
      if (this.dataset.value !== data) {
        this.dataset.value = data;
        if (data) this.setAttribute('aria-valuenow', data);
        else this.removeAttribute('aria-valuenow');
        this.setAttribute('aria-valuetext', text);
      }
      this.showSpl(value);
    }
  }

  /** The SPL reading under the bar: only with a calibration of this channel. */
  private showSpl(value: number): void {
    const el = this.splEl;
    const off = this.splOffsetDb;
    if (off === null || this.unit !== 'dBFS') {
      if (this.dataset.spl !== undefined) delete this.dataset.spl;
      return;
    }
    const spl = value + off;
    const text = `${this.splPrefix}${fmtLevel(spl, 1, LEVEL_FLOOR_DBFS + off)} dB SPL`;
    if (el && el.textContent !== text) el.textContent = text;
    const data = Number.isFinite(spl) && value >= LEVEL_FLOOR_DBFS ? (Math.round(spl * 10) / 10).toString() : '';
    if (this.dataset.spl !== data) this.dataset.spl = data;
  }

  private x(v: number, w: number): number {
    const f = (v - this.min) / (this.max - this.min);
    return Math.max(0, Math.min(1, f)) * w;
  }

  private draw(): void {
    const c = this.canvas;
    const g = c?.getContext('2d');
    if (!c || !g) return;
    if (!this.colors) {
      this.colors = { bar: themeColor('--ancb-meter'), track: themeColor('--ancb-meter-track'), peak: themeColor('--ancb-peak'), cap: themeColor('--ancb-cap') };
    }
    const { width: w, height: h } = c;
    g.fillStyle = this.colors.track;
    g.fillRect(0, 0, w, h);
    if (Number.isFinite(this.value)) {
      g.fillStyle = this.colors.bar;
      g.fillRect(0, 0, this.x(this.value, w), h);
    }
    // scale ticks every 10 units
    g.fillStyle = this.colors.peak;
    g.globalAlpha = 0.25;
    for (let v = Math.ceil(this.min / 10) * 10; v <= this.max; v += 10) g.fillRect(this.x(v, w), h * 0.7, 1, h * 0.3);
    g.globalAlpha = 1;
    if (Number.isFinite(this.peak)) {
      g.fillStyle = this.colors.peak;
      g.fillRect(this.x(this.peak, w) - 2, 0, 4, h);
    }
    if (Number.isFinite(this.cap)) {
      g.fillStyle = this.colors.cap;
      g.fillRect(this.x(this.cap, w) - 3, 0, 6, h);
    }
  }

  protected override render(): unknown {
    const dbfs = this.unit === 'dBFS';
    const calibrated = dbfs && this.splOffsetDb !== null;
    const spl = dbfs && !calibrated ? 'dB SPL: not calibrated' : '';
    const sub = [this.note, spl].filter(Boolean).join(' · ');
    return html`<span class="label">${this.label}</span><canvas part="bar" aria-hidden="true"></canvas><span class="value" part="value"></span>${sub || calibrated
      ? html`<span class="sub">${calibrated ? html`<b class="spl" part="spl"></b> <span>(${this.splNote})</span>${sub ? ' · ' : ''}` : ''}${sub}</span>`
      : ''}`;
  }
}

if (!customElements.get('ancb-meter')) customElements.define('ancb-meter', AncbMeter);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-meter': AncbMeter;
  }
}
