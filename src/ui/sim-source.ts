/**
 * <ancb-sim-source>: the simulated plant's settings: which scenario runs, how loud the listening
 * signal is, and whether the loudspeaker plays the error mic with control on or its control-off
 * twin (to compare by ear). Shows the scenario's causality verdict from its path delays.
 * Fires `ancb-scenario` (detail: id) and `ancb-monitor` (detail: { gainDb, source }).
 */
import { LitElement, css, html } from 'lit';
import { shared, formLayout } from './theme.ts';
import type { Scenario } from '../index.ts';
import { causalityVerdict } from '../web/index.ts';
import { scenarioDelays, MONITOR_CEILING_DBFS } from '../web/session.ts';
import { emit } from './emit.ts';

export interface ScenarioEntry {
  id: string;
  scenario: Scenario;
}

export class AncbSimSource extends LitElement {
  static override properties = {
    scenarios: { attribute: false },
    selectedId: {},
    monitorGainDb: { type: Number },
    monitorSource: {},
  };
  static override styles = [
    shared,
    formLayout,
    css`
      fieldset {
        border: 0;
        padding: 0;
        margin: 0.6rem 0 0;
        display: flex;
        gap: 1rem;
        flex-wrap: wrap;
        align-items: center;
      }
      p {
        margin: 0.5rem 0 0;
        line-height: 1.4;
      }
    `,
  ];

  declare scenarios: ScenarioEntry[];
  declare selectedId: string;
  declare monitorGainDb: number;
  declare monitorSource: 'on' | 'off';

  constructor() {
    super();
    this.scenarios = [];
    this.selectedId = '';
    this.monitorGainDb = -18;
    this.monitorSource = 'on';
  }

  private monitor(gainDb: number, source: 'on' | 'off'): void {
    this.monitorGainDb = gainDb;
    this.monitorSource = source;
    emit(this, 'ancb-monitor', { gainDb, source });
  }

  protected override render(): unknown {
    const entry = this.scenarios.find((s) => s.id === this.selectedId);
    const sc = entry?.scenario;
    const d = sc ? scenarioDelays(sc) : null;
    const v = d ? causalityVerdict(d.primaryMs, d.secondaryMs) : null;
    return html`<section class="card" aria-labelledby="sim-h">
      <h2 id="sim-h">Simulated plant</h2>
      <div class="grid">
        <label for="scenario">Scenario</label>
        <select id="scenario" @change=${(e: Event) => emit(this, 'ancb-scenario', (e.target as HTMLSelectElement).value)}>
          ${this.scenarios.map((s) => html`<option value=${s.id} ?selected=${s.id === this.selectedId}>${s.scenario.name ?? s.id}</option>`)}
        </select>
        <label for="listen">Listening level</label>
        <span class="pair"><input id="listen" type="range" min="-60" max="0" step="1" .value=${String(this.monitorGainDb)}
          aria-valuetext=${`${this.monitorGainDb} dB`}
          @input=${(e: Event) => this.monitor(Number((e.target as HTMLInputElement).value), this.monitorSource)} /><span class="muted small">${this.monitorGainDb} dB</span></span>
      </div>
      <fieldset>
        <legend>Loudspeaker plays</legend>
        <label><input type="radio" name="src" value="on" .checked=${this.monitorSource === 'on'} @change=${() => this.monitor(this.monitorGainDb, 'on')} />error mic</label>
        <label><input type="radio" name="src" value="off" .checked=${this.monitorSource === 'off'} @change=${() => this.monitor(this.monitorGainDb, 'off')} />error mic without control</label>
      </fieldset>
      ${sc ? html`<p class="muted small">${sc.description ?? ''} (${sc.sampleRate / 1000} kHz, block ${sc.blockSize})</p>` : ''}
      ${v ? html`<p class="verdict ${v.verdict === 'broadband' ? '' : 'no'}" data-causal=${String(v.verdict === 'broadband')}>${v.sentence}</p>` : ''}
      <p class="muted small">The listening signal is capped at ${MONITOR_CEILING_DBFS} dBFS peak. Keep your system volume low.</p>
    </section>`;
  }
}

if (!customElements.get('ancb-sim-source')) customElements.define('ancb-sim-source', AncbSimSource);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-sim-source': AncbSimSource;
  }
}
