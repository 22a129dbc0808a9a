/**
 * <ancb-live-setup>: the live session's steps before control: microphones and output, then the
 * secondary-path identification (round-trip latency and model), then the microphone geometry and
 * its causality verdict.
 *
 * The identification's notes are resolved into one ranked diagnosis (identification-text.ts). A
 * result too poor to control with is not loaded; "Load it anyway" first says what will happen (a
 * modal dialog), and a model loaded that way is shown as unverified (`trust`) until a control run
 * has shown that it works.
 *
 * Fires: `ancb-permission` (ask for microphone access), `ancb-choice` (detail: DeviceChoice),
 * `ancb-identify` (detail: { probeDbfs, firTaps }), `ancb-geometry`, `ancb-accept-model` (after the
 * user confirmed loading a poor model).
 */
import { LitElement, css, html } from 'lit';
import { shared, formLayout, dialogStyles } from './theme.ts';
import { diagnose, loadAnywayText } from './identification-text.ts';
import { fmtDb, fmtMs } from './format.ts';
import type { DeviceChoice, DeviceLists, MicLayout } from '../web/devices.ts';
import type { CausalityVerdict, GeometryResult, IdentificationResult } from '../web/index.ts';
import { emit } from './emit.ts';

export const PROBE_RANGE_DBFS: [number, number] = [-50, -12];

export class AncbLiveSetup extends LitElement {
  static override properties = {
    devices: { attribute: false },
    choice: { attribute: false },
    open: { type: Boolean },
    busy: {},
    result: { attribute: false },
    loaded: { type: Boolean },
    trust: {},
    geometry: { attribute: false },
    verdict: { attribute: false },
    reportedLatencyMs: { type: Number },
    probeDbfs: { type: Number },
    firTaps: { type: Number },
  };

  static override styles = [
    shared,
    formLayout,
    dialogStyles,
    css`
      h3 {
        font-size: 0.95rem;
        margin: 0.9rem 0 0.4rem;
      }
      fieldset {
        border: 0;
        padding: 0;
        margin: 0 0 0.5rem;
        display: flex;
        flex-direction: column;
        gap: 0.25rem;
      }
      progress {
        width: 100%;
        height: 0.9rem;
        accent-color: var(--ancb-accent);
      }
      dl {
        display: grid;
        grid-template-columns: auto minmax(0, 1fr);
        gap: 0.2rem 0.8rem;
        margin: 0.5rem 0 0;
      }
      dt {
        color: var(--ancb-muted);
      }
      dd {
        margin: 0;
        font-family: var(--ancb-mono);
      }
      ul.warn,
      ol.warn {
        padding-left: 1.1rem;
        margin: 0.4rem 0 0;
      }
      p {
        margin: 0.4rem 0;
        line-height: 1.4;
      }
    `,
  ];

  declare devices: DeviceLists | null;
  declare choice: DeviceChoice;
  declare open: boolean;
  declare busy: '' | 'permission' | 'identify' | 'geometry' | 'open';
  declare result: IdentificationResult | null;
  /** Whether `result` is the model the engine uses. */
  declare loaded: boolean;
  /** The loaded model's standing: measured well, loaded against advice and unverified, or shown to work by a control run. */
  declare trust: 'good' | 'unverified' | 'shown';
  declare geometry: GeometryResult | null;
  declare verdict: CausalityVerdict | null;
  declare reportedLatencyMs: number;
  declare probeDbfs: number;
  declare firTaps: number;

  constructor() {
    super();
    this.devices = null;
    this.choice = { layout: 'stereo', refDeviceId: '', errDeviceId: '', refChannel: 0, errChannel: 1, outputDeviceId: '' };
    this.open = false;
    this.busy = '';
    this.result = null;
    this.loaded = false;
    this.trust = 'good';
    this.geometry = null;
    this.verdict = null;
    this.reportedLatencyMs = NaN;
    this.probeDbfs = -30;
    this.firTaps = 256;
  }

  /** Probe progress 0 … 1, set by the display loop straight on the bar (no re-render). */
  showProgress(fraction: number): void {
    const bar = this.renderRoot.querySelector('progress');
    if (bar && Number.isFinite(fraction)) bar.value = fraction;
  }

  private change(patch: Partial<DeviceChoice>): void {
    this.choice = { ...this.choice, ...patch };
    emit(this, 'ancb-choice', this.choice);
  }

  private deviceSelect(id: string, label: string, value: string, list: { deviceId: string; label: string }[], key: 'refDeviceId' | 'errDeviceId' | 'outputDeviceId'): unknown {
    return html`<label for=${id}>${label}</label>
      <select id=${id} @change=${(e: Event) => this.change({ [key]: (e.target as HTMLSelectElement).value })}>
        <option value="" ?selected=${value === ''}>System default</option>
        ${list.filter((d) => d.deviceId !== 'default' && d.deviceId !== '').map((d) => html`<option value=${d.deviceId} ?selected=${d.deviceId === value}>${d.label}</option>`)}
      </select>`;
  }

  private channelSelect(id: string, label: string, value: number, key: 'refChannel' | 'errChannel'): unknown {
    return html`<label for=${id}>${label}</label>
      <select id=${id} @change=${(e: Event) => this.change({ [key]: Number((e.target as HTMLSelectElement).value) })}>
        <option value="0" ?selected=${value === 0}>channel 1 (left)</option>
        <option value="1" ?selected=${value === 1}>channel 2 (right)</option>
      </select>`;
  }

  private renderDevices(): unknown {
    if (!this.devices) {
      return html`<p>The browser lists microphones only after you allow access. Nothing is recorded or sent anywhere: audio stays in this tab.</p>
        <button id="permission" class="primary" ?disabled=${this.busy === 'permission'} @click=${() => emit(this, 'ancb-permission')}>Allow microphone access</button>`;
    }
    const c = this.choice;
    const layouts: [MicLayout, string][] = [
      ['stereo', 'one stereo device (both mics)'],
      ['two-devices', 'two devices, one mic each'],
      ['err-only', 'error mic only (tone follower)'],
    ];
    return html`<fieldset>
        <legend>Microphones</legend>
        ${layouts.map(([v, t]) => html`<label><input type="radio" name="layout" value=${v} .checked=${c.layout === v} @change=${() => this.change({ layout: v })} />${t}</label>`)}
      </fieldset>
      <div class="grid">
        ${c.layout === 'stereo'
          ? html`${this.deviceSelect('dev', 'Input device', c.refDeviceId, this.devices.inputs, 'refDeviceId')}
            ${this.channelSelect('ref-ch', 'Reference mic', c.refChannel, 'refChannel')}
            ${this.channelSelect('err-ch', 'Error mic', c.errChannel, 'errChannel')}`
          : c.layout === 'two-devices'
            ? html`${this.deviceSelect('ref-dev', 'Reference mic', c.refDeviceId, this.devices.inputs, 'refDeviceId')}
              ${this.deviceSelect('err-dev', 'Error mic', c.errDeviceId, this.devices.inputs, 'errDeviceId')}`
            : html`${this.deviceSelect('err-dev', 'Error mic', c.errDeviceId, this.devices.inputs, 'errDeviceId')}`}
        ${this.deviceSelect('out-dev', 'Output', c.outputDeviceId, this.devices.outputs, 'outputDeviceId')}
      </div>
      ${c.layout === 'two-devices' ? html`<p class="warn small">Two devices run on separate clocks: the delay between them drifts. Re-identify when the attenuation drops.</p>` : ''}
      ${c.layout === 'err-only' ? html`<p class="muted small">One-mic mode is for the tone follower (narrowband control); broadband FxLMS needs a reference mic.</p>` : ''}`;
  }

  private renderIdentify(): unknown {
    const r = this.result;
    const busy = this.busy === 'identify';
    return html`<h3>2 · Secondary path and round-trip latency</h3>
      <div class="grid">
        <label for="probe">Probe level</label>
        <span class="pair"><input id="probe" type="range" min=${PROBE_RANGE_DBFS[0]} max=${PROBE_RANGE_DBFS[1]} step="1" .value=${String(this.probeDbfs)}
          aria-valuetext=${`${this.probeDbfs} dBFS peak`}
          @input=${(e: Event) => (this.probeDbfs = Number((e.target as HTMLInputElement).value))} /><span class="small">${fmtDb(this.probeDbfs, 0)} dBFS peak</span></span>
        <label for="fir">Model length</label>
        <span class="pair"><input id="fir" type="number" min="16" max="4096" step="1" .value=${String(this.firTaps)}
          @change=${(e: Event) => (this.firTaps = Math.max(16, Math.min(4096, Math.round(Number((e.target as HTMLInputElement).value)) || 256)))} /><span class="small muted">taps after the delay</span></span>
      </div>
      <p><button id="identify" class="primary" ?disabled=${!this.open || busy} @click=${() => emit(this, 'ancb-identify', { probeDbfs: this.probeDbfs, firTaps: this.firTaps })}>${busy ? 'Identifying…' : r ? 'Identify again' : 'Identify secondary path'}</button></p>
      ${busy ? html`<progress max="1" value="0" aria-label="probe progress"></progress>` : ''}
      ${!this.open ? html`<p class="muted small">Open the microphones first (Start).</p>` : ''}
      ${r ? this.renderResult(r) : ''}`;
  }

  private renderResult(r: IdentificationResult): unknown {
    const d = diagnose(r);
    const trust = this.trust === 'unverified' ? html`<p class="warn" id="model-trust" data-trust="unverified"><b>Loaded, unverified:</b> the measurement was too poor; no attenuation is shown until a control run lowers the error level clearly.</p>`
      : this.trust === 'shown' ? html`<p class="small" id="model-trust" data-trust="shown">Loaded against the identification's advice; a control run has since lowered the error level clearly, so it works here.</p>`
      : html`<p class="small muted" id="model-trust" data-trust="good">This model is loaded.</p>`;
    return html`<dl>
        <dt>Round trip</dt><dd data-field="delay">${d.responseFound ? html`${fmtMs(r.delayMs, 2)} (${r.delaySamples} samples)` : 'not found (no response)'}</dd>
        <dt>Browser reports</dt><dd>${fmtMs(this.reportedLatencyMs)} (output + base latency; the measurement also includes input and air)</dd>
        <dt>Measurement SNR</dt><dd>${r.snrDb === null ? 'not measured' : Number.isFinite(r.snrDb) ? `${fmtDb(r.snrDb)} dB` : 'none: no response'}</dd>
        <dt>Loudspeaker → ref mic</dt><dd>${d.responseFound ? `${fmtDb(r.feedbackRatioDb)} dB re error mic` : 'not meaningful without a response'}</dd>
        <dt>Model</dt><dd>${r.model.length} taps</dd>
      </dl>
      <p class=${d.kind === 'ok' ? '' : 'warn'} id="diagnosis" data-kind=${d.kind}>${d.headline}</p>
      ${d.ranked.length ? html`<ol class="warn small" id="diagnosis-more">${d.ranked.map((w) => html`<li>${w}</li>`)}</ol>` : ''}
      ${this.loaded
        ? trust
        : html`<p class="warn">Not loaded: the measurement is too poor to control with safely.</p>
            <button id="accept-model" @click=${() => this.renderRoot.querySelector<HTMLDialogElement>('#load-anyway')?.showModal()}>Load it anyway…</button>
            <dialog id="load-anyway" aria-labelledby="la-h">
              <h2 id="la-h">Load a model that failed identification?</h2>
              <p>${loadAnywayText(d)}</p>
              <div class="buttons">
                <button id="cancel-load" @click=${() => this.renderRoot.querySelector<HTMLDialogElement>('#load-anyway')?.close()}>Cancel</button>
                <button id="confirm-load" class="primary" @click=${() => {
                  this.renderRoot.querySelector<HTMLDialogElement>('#load-anyway')?.close();
                  emit(this, 'ancb-accept-model');
                }}>Load it, unverified</button>
              </div>
            </dialog>`}`;
  }

  private renderGeometry(): unknown {
    const g = this.geometry;
    const v = this.verdict;
    return html`<h3>3 · Geometry and causality</h3>
      <p class="muted small">With control off and the noise running, measure how long the noise takes from the reference mic to the error mic.</p>
      <button id="geometry" ?disabled=${!this.open || this.busy === 'geometry'} @click=${() => emit(this, 'ancb-geometry')}>Measure mic geometry</button>
      ${g && g.primaryDelayMs === null ? html`<p class="warn">${g.note}</p>` : ''}
      ${v ? html`<p class="verdict ${v.verdict === 'broadband' ? '' : 'no'}" data-causal=${String(v.verdict === 'broadband')}>${v.sentence}</p>` : ''}`;
  }

  protected override render(): unknown {
    return html`<section class="card" aria-labelledby="live-h">
      <h2 id="live-h">Live microphones</h2>
      <h3>1 · Devices</h3>
      ${this.renderDevices()} ${this.renderIdentify()} ${this.renderGeometry()}
    </section>`;
  }
}

if (!customElements.get('ancb-live-setup')) customElements.define('ancb-live-setup', AncbLiveSetup);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-live-setup': AncbLiveSetup;
  }
}
