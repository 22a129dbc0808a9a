/**
 * <ancb-level-check>: the live level-cap check (src/engine/level-cap-check.ts, run by the live audio
 * processor). With the user's consent (a confirm step naming what will play), a tone and noise (and,
 * when asked, adversarial patterns: square waves near Nyquist, steps, bursts, NaN and huge values)
 * each ramp from a safe start level to a set amount above the cap through the output stage; every
 * sample handed to the audio output is measured against the cap. The result shows the verdict, the
 * largest sample and true peak, the limiter's gain reduction, the events, a plot of the ramp, and
 * links to save the report as JSON and as a readable HTML page (src/web/level-check-report.ts).
 *
 * Fires `ancb-level-check` {signal} (after the confirm step) and `ancb-level-check-cancel`.
 * The display loop sets the progress with `showProgress` (no re-render).
 */
import { LitElement, css, html } from 'lit';
import { shared, formLayout, dialogStyles } from './theme.ts';
import { dataValue as dv, fmtDb, fmtHz, readNumberField } from './format.ts';
import type { PlotConfig, AncbPlot } from './plot.ts';
import './plot.ts';
import type { LiveLevelCheckReport } from '../web/level-check-report.ts';
import type { LevelCheckRequest } from '../web/index.ts';
import { DEFAULT_HOLD_S, DEFAULT_GAP_S, DEFAULT_OVER_DB, DEFAULT_START_DBFS, limitsTruePeak, TRUE_PEAK_TOLERANCE_DB } from '../index.ts';
import { emit } from './emit.ts';

export const LC_RAMP_S_DEFAULT = 2;
export const LC_START_RANGE: [number, number] = [-90, -10];
export const LC_OVER_RANGE: [number, number] = [0, 20];
export const LC_RAMP_RANGE: [number, number] = [0.2, 20];

const RAMP_PLOT: PlotConfig = {
  xLabel: 'time (s)',
  yLabel: 'level (dBFS)',
  series: [
    { label: 'test signal level', colorVar: '--ancb-series-true', dash: [5, 4], unit: 'dBFS' },
    { label: 'output sample peak', colorVar: '--ancb-series-on', unit: 'dBFS' },
    { label: 'output true peak', colorVar: '--ancb-series-model', dash: [2, 3], unit: 'dBTP' },
    { label: 'cap', colorVar: '--ancb-cap', dash: [8, 4], unit: 'dBFS' },
  ],
};

/** Seconds a check of these settings lasts (ramp + hold + gap per kind, and a short tail). */
export function checkDurationS(signal: LevelCheckRequest['signal']): number {
  const kinds = signal.kinds?.length ?? 3;
  return kinds * ((signal.rampS ?? LC_RAMP_S_DEFAULT) + (signal.holdS ?? DEFAULT_HOLD_S) + (signal.gapS ?? DEFAULT_GAP_S)) + 0.3;
}


export class AncbLevelCheck extends LitElement {
  static override properties = {
    open: { type: Boolean },
    running: { type: Boolean },
    capText: {},
    capDbfs: { type: Number },
    defaultToneHz: { type: Number },
    sampleRate: { type: Number },
    report: { attribute: false },
    links: { attribute: false },
    problem: { state: true },
  };

  static override styles = [
    shared,
    formLayout,
    dialogStyles,
    css`
      p {
        margin: 0.4rem 0;
        line-height: 1.4;
      }
      .pair input[type='number'] {
        width: 6rem;
        min-width: 0;
      }
      .row {
        display: flex;
        gap: 0.6rem;
        flex-wrap: wrap;
        align-items: center;
        margin-top: 0.6rem;
      }
      .check {
        display: flex;
        align-items: center;
        gap: 0.45rem;
        font-weight: 600;
      }
      progress {
        width: 100%;
        height: 0.9rem;
        accent-color: var(--ancb-accent);
      }
      .verdict {
        font-weight: 700;
        font-size: 1.1rem;
        border-left: 5px solid var(--ancb-on);
        padding-left: 0.6rem;
        margin: 0.6rem 0 0.3rem;
      }
      .verdict.failed {
        border-left-color: var(--ancb-danger);
        color: var(--ancb-danger);
      }
      dl {
        display: grid;
        grid-template-columns: auto minmax(0, 1fr);
        gap: 0.2rem 0.8rem;
        margin: 0.4rem 0;
      }
      dt {
        color: var(--ancb-muted);
      }
      dd {
        margin: 0;
        font-family: var(--ancb-mono);
      }
      a.button {
        display: inline-flex;
        align-items: center;
        background: var(--ancb-button);
        border: 2px solid var(--ancb-line-strong);
        border-radius: 8px;
        padding: 0.45rem 0.9rem;
        min-height: 2.6rem;
        box-sizing: border-box;
        color: var(--ancb-fg);
        text-decoration: none;
        font-weight: 600;
      }
      .problem {
        color: var(--ancb-danger);
        min-height: 1.2em;
        margin: 0.3rem 0 0;
        font-size: 0.9rem;
      }
      ancb-plot {
        margin-top: 0.5rem;
      }
    `,
  ];

  declare open: boolean;
  declare running: boolean;
  /** How the cap was set (dBFS, or the stricter SPL rule). */
  declare capText: string;
  /** The cap that applies, dBFS. */
  declare capDbfs: number;
  declare defaultToneHz: number;
  declare sampleRate: number;
  declare report: LiveLevelCheckReport | null;
  /** Blob URLs of the saved forms of the report. */
  declare links: { json: string; html: string } | null;
  declare problem: string;
  private pendingSignal: LevelCheckRequest['signal'] | null = null;

  constructor() {
    super();
    this.open = false;
    this.running = false;
    this.capText = '';
    this.capDbfs = -20;
    this.defaultToneHz = 1000;
    this.sampleRate = 48000;
    this.report = null;
    this.links = null;
    this.problem = '';
  }

  /** Progress 0 … 1, set by the display loop straight on the bar. */
  showProgress(fraction: number): void {
    const bar = this.renderRoot.querySelector<HTMLProgressElement>('#lc-progress');
    if (bar && Number.isFinite(fraction)) bar.value = fraction;
  }

  private read(id: string, field: string, lo: number, hi: number): number | null {
    const r = readNumberField(this.renderRoot, id, field, lo, hi);
    if ('problem' in r) {
      this.problem = r.problem;
      return null;
    }
    return r.value;
  }

  private async ask(): Promise<void> {
    this.problem = '';
    const toneHz = this.read('lc-tone-hz', 'Tone frequency (Hz)', 20, Math.floor(0.45 * this.sampleRate));
    const startDbfs = toneHz === null ? null : this.read('lc-start', 'Start level (dBFS)', LC_START_RANGE[0], LC_START_RANGE[1]);
    const overDb = startDbfs === null ? null : this.read('lc-over', 'Above the cap (dB)', LC_OVER_RANGE[0], LC_OVER_RANGE[1]);
    const rampS = overDb === null ? null : this.read('lc-ramp', 'Ramp per signal (s)', LC_RAMP_RANGE[0], LC_RAMP_RANGE[1]);
    if (toneHz === null || startDbfs === null || overDb === null || rampS === null) return;
    const adversarial = this.renderRoot.querySelector<HTMLInputElement>('#lc-adversarial')?.checked ?? false;
    this.pendingSignal = { toneHz, startDbfs, overDb, rampS, kinds: adversarial ? ['tone', 'noise', 'adversarial'] : ['tone', 'noise'] };
    this.requestUpdate();
    await this.updateComplete;
    const d = this.renderRoot.querySelector<HTMLDialogElement>('#lc-confirm');
    d?.showModal();
    this.renderRoot.querySelector<HTMLButtonElement>('#lc-confirm-ok')?.focus();
  }

  private confirm(ok: boolean): void {
    this.renderRoot.querySelector<HTMLDialogElement>('#lc-confirm')?.close();
    if (ok && this.pendingSignal) emit(this, 'ancb-level-check', { signal: this.pendingSignal });
    this.pendingSignal = null;
  }

  protected override updated(changed: Map<string, unknown>): void {
    if (changed.has('report') && this.report) {
      const h = this.report.history;
      const t = Array.from(h.timeS);
      const nul = (a: ArrayLike<number>): (number | null)[] => Array.from(a as ArrayLike<number>, (v) => (Number.isFinite(v) ? v : null));
      const plot = this.renderRoot.querySelector<AncbPlot>('#lc-plot');
      plot?.setData([t, nul(h.levelDbfs), nul(h.samplePeakDbfs), nul(h.truePeakDbtp), t.map(() => this.report!.ceilingDbfs)]);
    }
  }

  private renderResult(r: LiveLevelCheckReport): unknown {
    const c = r.ceilingDbfs;
    const o = r.handedToOutput;
    const yLow = Math.floor(Math.min(r.check.startDbfs, c) - 6);
    const yHigh = Math.ceil(Math.max(r.check.topDbfs, c) + 6);
    return html`<p class="verdict ${r.passed ? '' : 'failed'}" id="lc-verdict" data-passed=${String(r.passed)} role="status">
        ${!r.passed
          ? `Failed: ${r.reasons.join('; ')}.`
          : limitsTruePeak(r.limiterMode)
            ? `Passed: no sample handed to the output went above the ${fmtDb(c, 2)} dBFS cap, and the 4× true peak stayed within ${TRUE_PEAK_TOLERANCE_DB} dB of it.`
            : `Sample peak held; true peak not limited: ${fmtDb(r.maxTruePeakDbtp, 2)} dBTP.`}
      </p>
      <dl>
        <dt>Cap</dt><dd data-field="ceiling" data-value=${dv(c)}>${fmtDb(c, 2)} dBFS sample peak${r.ceiling.spl ? ` (stricter of ${fmtDb(r.ceiling.dbfsCeiling, 1)} dBFS and ${fmtDb(r.ceiling.spl.peakCeilingDbSpl, 1)} dB SPL peak)` : ''}</dd>
        <dt>Largest sample peak</dt><dd data-field="sample-peak" data-value=${dv(r.maxSamplePeakDbfs)}>${fmtDb(r.maxSamplePeakDbfs, 3)} dBFS, ${r.samplesOverCeiling} samples over</dd>
        <dt>Handed to the output</dt><dd data-field="handed-peak" data-value=${dv(o.maxSamplePeakDbfs)} data-over=${String(o.samplesOverCeiling)} data-samples=${String(o.samples)}>${o.samples} samples, largest ${fmtDb(o.maxSamplePeakDbfs, 3)} dBFS, ${o.samplesOverCeiling} over, ${o.nonFinite} not finite</dd>
        <dt>True peak (4×)</dt><dd data-field="true-peak" data-value=${dv(r.maxTruePeakDbtp)}>${fmtDb(r.maxTruePeakDbtp, 2)} dBTP${limitsTruePeak(r.limiterMode) ? ` (held within ${TRUE_PEAK_TOLERANCE_DB} dB of the cap)` : ' (sample-peak limiter: reported, not limited; up to about 6 dB over the cap is possible)'}</dd>
        <dt>Limiter</dt><dd data-field="gr" data-value=${dv(r.maxGainReductionDb)}>${r.limiterMode}, up to ${fmtDb(r.maxGainReductionDb, 1)} dB gain reduction</dd>
        ${r.check.errorMic ? html`<dt>Error mic</dt><dd data-field="mic">peak ${fmtDb(r.check.errorMic.maxSamplePeakDbfs, 1)} dBFS${r.check.errorMic.maxPeakDbSpl !== null ? ` = ${fmtDb(r.check.errorMic.maxPeakDbSpl, 1)} dB SPL peak` : ''}</dd>` : ''}
        <dt>Test signal</dt><dd>${r.check.segments.filter((s) => s.kind !== 'gap').map((s) => s.kind).join(', ')}: ${fmtDb(r.check.startDbfs, 1)} → ${fmtDb(r.check.topDbfs, 1)} dBFS, tone ${fmtHz(r.check.toneHz)}, ${r.check.durationS.toFixed(1)} s${r.check.completed ? '' : ' (stopped early)'}</dd>
        <dt>Events</dt><dd data-field="events" data-value=${String(r.events.length)}>${r.events.length}${r.events.length ? `: ${[...new Set(r.events.map((e) => e.cause))].join(', ')}` : ''}</dd>
      </dl>
      <ancb-plot id="lc-plot" heading="Level ramp through the output stage" .config=${{ ...RAMP_PLOT, yRange: [yLow, yHigh] as [number, number] }}
        summary="Per 10 ms: the test signal's level before the output stage, and the output's sample and true peak against the cap"></ancb-plot>
      ${this.links
        ? html`<div class="row">
            <a class="button" id="lc-save-json" href=${this.links.json} download="level-check.json">Save report (JSON)</a>
            <a class="button" id="lc-save-html" href=${this.links.html} download="level-check.html">Save report (HTML)</a>
          </div>`
        : ''}`;
  }

  protected override render(): unknown {
    const sig = this.pendingSignal;
    return html`<section class="card" aria-labelledby="lc-h">
      <h2 id="lc-h">Level-cap check</h2>
      <p class="small">Ramps a tone and noise from a safe level to past the cap through the output stage and checks, sample by sample, that nothing handed to the audio output exceeds the cap. Cap now: <b id="lc-cap">${this.capText}</b>.</p>
      <div class="grid">
        <label for="lc-tone-hz">Tone</label>
        <span class="pair"><input id="lc-tone-hz" type="number" min="20" step="any" .value=${String(this.defaultToneHz)} /><span class="small muted">Hz</span></span>
        <label for="lc-start">Start level</label>
        <span class="pair"><input id="lc-start" type="number" min=${LC_START_RANGE[0]} max=${LC_START_RANGE[1]} step="1" .value=${String(DEFAULT_START_DBFS)} /><span class="small muted">dBFS (or the cap − the overshoot, if lower)</span></span>
        <label for="lc-over">Past the cap</label>
        <span class="pair"><input id="lc-over" type="number" min=${LC_OVER_RANGE[0]} max=${LC_OVER_RANGE[1]} step="1" .value=${String(DEFAULT_OVER_DB)} /><span class="small muted">dB above the cap at the top of the ramp</span></span>
        <label for="lc-ramp">Ramp</label>
        <span class="pair"><input id="lc-ramp" type="number" min=${LC_RAMP_RANGE[0]} max=${LC_RAMP_RANGE[1]} step="0.1" .value=${String(LC_RAMP_S_DEFAULT)} /><span class="small muted">s per signal</span></span>
      </div>
      <div class="row"><label class="check"><input id="lc-adversarial" type="checkbox" />Also adversarial patterns (harsh: square waves near Nyquist, steps, bursts)</label></div>
      <div class="row">
        ${this.running
          ? html`<button id="lc-cancel" @click=${() => emit(this, 'ancb-level-check-cancel')}>Stop the check</button>`
          : html`<button id="lc-run" class="primary" ?disabled=${!this.open} @click=${() => void this.ask()}>Run level check…</button>`}
      </div>
      ${this.running ? html`<progress id="lc-progress" max="1" value="0" aria-label="level check progress"></progress>` : ''}
      ${!this.open ? html`<p class="small muted">Open the microphones and output first (Start).</p>` : ''}
      <p class="problem" role="alert">${this.problem}</p>
      ${this.report ? this.renderResult(this.report) : ''}
      <dialog id="lc-confirm" aria-labelledby="lcc-h" @cancel=${(e: Event) => { e.preventDefault(); this.confirm(false); }}>
        <h2 id="lcc-h">Run the level-cap check?</h2>
        ${sig
          ? html`<p>${sig.kinds?.join(', ')} will each ramp from ${fmtDb(Math.min(sig.startDbfs ?? DEFAULT_START_DBFS, this.capDbfs - (sig.overDb ?? DEFAULT_OVER_DB)), 1)} dBFS to ${fmtDb(this.capDbfs + (sig.overDb ?? DEFAULT_OVER_DB), 1)} dBFS (the limiter holds the output at the ${fmtDb(this.capDbfs, 1)} dBFS cap), about ${checkDurationS(sig).toFixed(0)} s in all. Control switches off first.</p>`
          : ''}
        <p class="warn">The output will sit at the cap for a while: turn the volume down, or take headphones off. Stop at any discomfort.</p>
        <div class="buttons">
          <button id="lc-confirm-cancel" @click=${() => this.confirm(false)}>Cancel</button>
          <button id="lc-confirm-ok" class="primary" @click=${() => this.confirm(true)}>I consent, run it</button>
        </div>
      </dialog>
    </section>`;
  }
}

if (!customElements.get('ancb-level-check')) customElements.define('ancb-level-check', AncbLevelCheck);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-level-check': AncbLevelCheck;
  }
}
