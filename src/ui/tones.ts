/**
 * <ancb-tones>: what the tone follower does, at a glance: the tracked fundamental and lock, and per
 * harmonic its frequency, level before and after control at the error mic (dBFS, AES17), the
 * attenuation, and how far the counter-signal is from anti-phase (0° = exactly opposite the
 * disturbance). The display loop calls `show(state)`; cells change by textContent, at most four
 * times a second, and the table's rows are rebuilt only when the number of harmonics changes.
 */
import { LitElement, css, html } from 'lit';
import { shared, tableStyles } from './theme.ts';
import { fmtDb, fmtHz } from './format.ts';
import type { DisplayState } from './display-state.ts';

const INTERVAL_MS = 250;

/** Distance from anti-phase in degrees (0 … 180): 0 when the counter-signal is exactly opposite. */
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
      th,
      td {
        padding: 0.2rem 0.5rem;
      }
    `,
  ];

  declare rows: number;
  private last = 0;

  constructor() {
    super();
    this.rows = 0;
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
    for (let k = 0; k < this.rows; k++) {
      set(`#hz${k}`, fmtHz(d.hHz[k]!));
      set(`#b${k}`, fmtDb(d.hBeforeDb[k]!));
      set(`#a${k}`, fmtDb(d.hAfterDb[k]!));
      set(`#att${k}`, fmtDb(d.hAttDb[k]!));
      set(`#ph${k}`, Number.isFinite(d.hPhaseDeg[k]!) ? `${fromAntiPhaseDeg(d.hPhaseDeg[k]!).toFixed(0)}°` : '—');
    }
  }

  protected override render(): unknown {
    const rows = Array.from({ length: this.rows }, (_, k) => k);
    return html`<section class="card" aria-labelledby="tones-h">
      <h2 id="tones-h">Tone follower</h2>
      ${this.rows === 0
        ? html`<p class="muted">Not running. Choose “Tone follower” as the algorithm to control tones and harmonics.</p>`
        : html`<div class="head"><span class="muted">fundamental</span><span class="f0" aria-live="off">—</span><span class="lock"></span></div>
            <div class="scroll"><table>
              <thead>
                <tr><th scope="col">#</th><th scope="col">frequency</th><th scope="col">before</th><th scope="col">after</th><th scope="col">attenuation</th><th scope="col">phase error</th></tr>
              </thead>
              <tbody>
                ${rows.map((k) => html`<tr><td>${k + 1}</td><td id=${`hz${k}`}>—</td><td id=${`b${k}`}>—</td><td id=${`a${k}`}>—</td><td id=${`att${k}`}>—</td><td id=${`ph${k}`}>—</td></tr>`)}
              </tbody>
            </table></div>
            <p class="note small muted">Before and after: the harmonic's level at the error mic without and with control, dBFS (AES17). Attenuation in dB. Phase error: how far the counter-signal is from exact anti-phase.</p>`}
    </section>`;
  }
}

if (!customElements.get('ancb-tones')) customElements.define('ancb-tones', AncbTones);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-tones': AncbTones;
  }
}
