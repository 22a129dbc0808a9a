/**
 * <ancb-tones>: what the tone follower does, at a glance: the tracked fundamental and lock, and per
 * harmonic its frequency, the error mic's level around it without and with control, the attenuation,
 * and how far the anti-noise is from anti-phase.
 *
 * Measured and estimated figures are kept apart and look different:
 *  - "before" and "after" are measured: the error-mic level in a band around k·f₀ (tone-levels.ts)
 *    from the panel's control-off and control-on spectra (live: the last seconds recorded with control
 *    off, and with control on; simulated: the simulator's control-off twin and the controlled plant);
 *  - attenuation is before − after, shown only when the app allows a measured attenuation (a
 *    control-off level exists and the model is not unverified), otherwise a placeholder and the reason;
 *  - the phase error rests on the secondary-path model (the controller's own estimate) and is marked
 *    as an estimate.
 * The display loop calls `show(state)`; cells change by textContent, at most four times a second, and
 * the table's rows are rebuilt only when the number of harmonics changes.
 */
import { LitElement, css, html } from 'lit';
import { shared, tableStyles } from './theme.ts';
import { NO_VALUE, fmtDb, fmtDeg, fmtHz, fmtLevel } from './format.ts';
import { toneBandText, toneLevelDbfs, type Spectrum } from './tone-levels.ts';
import type { DisplayState } from './display-state.ts';

const INTERVAL_MS = 250;

/** Distance from anti-phase in degrees (0 … 180): 0 when the anti-noise is exactly opposite. */
export function fromAntiPhaseDeg(counterPhaseDeg: number): number {
  const d = Math.abs(counterPhaseDeg);
  return 180 - d;
}

export class AncbTones extends LitElement {
  static override properties = { rows: { state: true } };
  static override styles = [
    shared,
    tableStyles,
    css`
      :host {
        display: block;
      }
      .head {
        display: flex;
        gap: 1.2rem;
        align-items: baseline;
        flex-wrap: wrap;
        margin-bottom: 0.4rem;
      }
      .f0 {
        font-family: var(--ancb-mono);
        font-size: 1.8rem;
        font-weight: 700;
        color: var(--ancb-series-now);
      }
      .scroll {
        overflow-x: auto;
      }
      table {
        border-collapse: collapse;
        width: 100%;
        font-size: 0.95rem;
      }
      .note {
        margin: 0.4rem 0 0;
      }
      .legend {
        margin: 0 0 0.3rem;
      }
      th,
      td {
        padding: 0.2rem 0.5rem;
      }
    `,
  ];

  declare rows: number;
  private last = 0;
  private off: Spectrum | null = null;
  private on: Spectrum | null = null;
  /** Why no attenuation is shown ('' when it may be). */
  private noAttenuation = 'no spectra yet';
  private basis = '';

  constructor() {
    super();
    this.rows = 0;
  }

  /**
   * The measured spectra behind "before" and "after" (null: none yet), what the control-off one rests
   * on, and why attenuation may not be shown ('' when it may).
   */
  setSpectra(off: Spectrum | null, on: Spectrum | null, basis: string, noAttenuation: string): void {
    this.off = off;
    this.on = on;
    this.basis = basis;
    this.noAttenuation = noAttenuation;
  }

  show(d: DisplayState, nowMs: number): void {
    if (d.toneHarmonics !== this.rows) this.rows = d.toneHarmonics;
    if (nowMs - this.last < INTERVAL_MS) return;
    this.last = nowMs;
    const set = (sel: string, text: string): void => {
      const el = this.renderRoot.querySelector(sel);
      if (el && el.textContent !== text) el.textContent = text;
    };
    set('.f0', fmtHz(d.toneHz));
    set('.lock', Number.isNaN(d.toneLocked) ? '' : d.toneLocked === 1 ? 'locked' : 'searching');
    const band = this.off ? toneBandText(this.off.resolutionHz) : 'a band around each harmonic';
    set('.basis', `Before: ${this.basis || 'control-off spectrum'}, ${band}. After: the same band with control on.`);
    set('.why', this.noAttenuation ? `Attenuation not shown: ${this.noAttenuation}.` : '');
    for (let k = 0; k < this.rows; k++) {
      const hz = d.hHz[k]!;
      const before = this.off ? toneLevelDbfs(this.off, hz) : NaN;
      const after = this.on ? toneLevelDbfs(this.on, hz) : NaN;
      set(`#hz${k}`, fmtHz(hz));
      set(`#b${k}`, fmtLevel(before));
      set(`#a${k}`, fmtLevel(after));
      set(`#att${k}`, this.noAttenuation ? NO_VALUE : fmtDb(before - after));
      const ph = d.hPhaseDeg[k]!;
      set(`#ph${k}`, Number.isFinite(ph) && Number.isFinite(hz) && hz > 0 ? fmtDeg(fromAntiPhaseDeg(ph)) : NO_VALUE);
    }
  }

  protected override render(): unknown {
    const rows = Array.from({ length: this.rows }, (_, k) => k);
    return html`<section class="card" aria-labelledby="tones-h">
      <h2 id="tones-h">Tone follower</h2>
      ${this.rows === 0
        ? html`<p class="muted">Not running. Choose “Tone follower” as the algorithm to control tones and harmonics.</p>`
        : html`<div class="head"><span class="muted">fundamental</span><span class="f0" aria-live="off">—</span><span class="lock"></span></div>
            <p class="legend small"><span class="meas">before, after, attenuation <span class="tag">measured</span></span> · <span class="est">phase error <span class="tag">estimate</span></span></p>
            <div class="scroll"><table>
              <thead>
                <tr><th scope="col">#</th><th scope="col">frequency</th><th scope="col">before</th><th scope="col">after</th><th scope="col">atten.</th><th scope="col" class="est">phase err.</th></tr>
              </thead>
              <tbody>
                ${rows.map((k) => html`<tr><td>${k + 1}</td><td id=${`hz${k}`}>—</td><td id=${`b${k}`}>—</td><td id=${`a${k}`}>—</td><td id=${`att${k}`}>—</td><td id=${`ph${k}`} class="est">—</td></tr>`)}
              </tbody>
            </table></div>
            <p class="note small muted"><span class="basis"></span> Levels in dBFS (AES17), attenuation (before − after) in dB. <span class="why warn"></span></p>
            <p class="note small muted"><span class="est">Phase error</span>: how far the anti-noise is from exact anti-phase, estimated by the controller from the secondary-path model (not measured).</p>`}
    </section>`;
  }
}

if (!customElements.get('ancb-tones')) customElements.define('ancb-tones', AncbTones);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-tones': AncbTones;
  }
}
