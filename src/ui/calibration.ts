/**
 * <ancb-calibration>: dB SPL for the live session, from the user's own measurements.
 *
 * Output (loudspeaker → ear position), per output device: the user plays a calibration tone at a set
 * level (default −30 dBFS, AES17) at a frequency in the band of use, reads the SPL at the ear position
 * on a sound level meter and enters it. Each reading gives a sensitivity S(f) = SPL − dBFS (the RMS
 * SPL a full-scale sine would give there; src/engine/calibration.ts does all the arithmetic: this
 * element only shows its results). The calibration holds between the lowest and highest frequency
 * measured; outside that range SPL is unknown and not shown. With a calibration the cap can also be
 * set in dB SPL (peak): its dBFS equivalent uses the highest sensitivity measured, +3.01 dB for a
 * sine's peak, and the stricter of the two caps applies.
 *
 * Microphone: optionally from a source of known SPL (a sound calibrator, or a steady tone whose SPL
 * a meter reads at the error mic): a short recording gives the mic's sensitivity, and the error meter
 * then reads dB SPL over the range the user states the mic is flat.
 *
 * Fires (all bubbling, composed): `ancb-tone` {hz, dbfs} (after the confirm step), `ancb-tone-save`
 * {measuredDbSpl}, `ancb-tone-stop`, `ancb-cal-remove` {hz}, `ancb-spl-cap` {peakDbSpl | null},
 * `ancb-mic-measure` {knownDbSpl, hz, validFromHz, validToHz, seconds}, `ancb-mic-clear`.
 */
import { LitElement, css, html } from 'lit';
import { shared, formLayout, dialogStyles, tableStyles } from './theme.ts';
import { dataValue as dv, fmtDb, fmtHz, readNumberField } from './format.ts';
import { ceilingDbfsForPeakSpl, createOutputCalibration, dbfsToDbSpl, SINE_CREST_DB, type OutputCalibration } from '../index.ts';
import type { EffectiveCeiling } from '../index.ts';
import type { StoredMicCalibration, StoredOutputCalibration } from '../index.ts';
import { TONE_DBFS_RANGE, TONE_MAX_S, TONE_MIN_HZ } from '../web/index.ts';
import { emit } from './emit.ts';

/** Default calibration tone level, dBFS (AES17): low enough for a first try, loud enough for most meters. */
export const DEFAULT_TONE_DBFS = -30;
export const DEFAULT_TONE_HZ = 1000;
/** Frequencies offered for readings, Hz (any other may be typed). */
export const SUGGESTED_HZ = [63, 100, 125, 160, 250, 500, 1000, 2000];
export const SPL_CAP_RANGE: [number, number] = [20, 140];
export const MIC_RECORD_S = 3;


export class AncbCalibration extends LitElement {
  static override properties = {
    open: { type: Boolean },
    sampleRate: { type: Number },
    outputLabel: {},
    output: { attribute: false },
    capDbfs: { type: Number },
    effective: { attribute: false },
    tone: { attribute: false },
    busy: {},
    micLabel: {},
    mic: { attribute: false },
    toneHz: { state: true },
    toneDbfs: { state: true },
    problem: { state: true },
  };

  static override styles = [
    shared,
    formLayout,
    dialogStyles,
    tableStyles,
    css`
      h3 {
        font-size: 0.95rem;
        margin: 0.9rem 0 0.4rem;
      }
      p {
        margin: 0.4rem 0;
        line-height: 1.4;
      }
      .pair input[type='number'] {
        width: 6.5rem;
        min-width: 0;
      }
      table {
        border-collapse: collapse;
        width: 100%;
        font-size: 0.9rem;
        margin: 0.4rem 0;
      }
      th,
      td {
        padding: 0.2rem 0.35rem;
      }
      .problem {
        color: var(--ancb-danger);
        min-height: 1.2em;
        margin: 0.3rem 0 0;
        font-size: 0.9rem;
      }
      .playing {
        border: 2px solid var(--ancb-warn);
        border-radius: 8px;
        padding: 0.5rem 0.7rem;
        margin: 0.5rem 0;
      }
      .row {
        display: flex;
        gap: 0.5rem;
        flex-wrap: wrap;
        align-items: center;
        margin-top: 0.4rem;
      }
    `,
  ];

  declare open: boolean;
  declare sampleRate: number;
  declare outputLabel: string;
  declare output: StoredOutputCalibration | null;
  /** The user's dBFS cap. */
  declare capDbfs: number;
  /** The cap that applies (the stricter rule), from the panel. */
  declare effective: EffectiveCeiling | null;
  /** The tone now playing, or null. */
  declare tone: { hz: number; dbfs: number } | null;
  declare busy: '' | 'tone' | 'mic';
  declare micLabel: string;
  declare mic: StoredMicCalibration | null;
  declare toneHz: number;
  declare toneDbfs: number;
  declare problem: string;

  constructor() {
    super();
    this.open = false;
    this.sampleRate = 48000;
    this.outputLabel = 'system default';
    this.output = null;
    this.capDbfs = -20;
    this.effective = null;
    this.tone = null;
    this.busy = '';
    this.micLabel = 'error microphone';
    this.mic = null;
    this.toneHz = DEFAULT_TONE_HZ;
    this.toneDbfs = DEFAULT_TONE_DBFS;
    this.problem = '';
  }

  /** A number field's value within [lo, hi], or null with the problem stated (field, range, value). */
  private read(id: string, field: string, lo: number, hi: number): number | null {
    const r = readNumberField(this.renderRoot, id, field, lo, hi);
    if ('problem' in r) {
      this.problem = r.problem;
      return null;
    }
    return r.value;
  }

  private get maxToneDbfs(): number {
    // the tone must pass the limiter untouched: half a dB below the cap that applies
    const cap = this.effective?.ceilingDbfs ?? this.capDbfs;
    return Math.min(TONE_DBFS_RANGE[1], Math.floor((cap - 0.5) * 10) / 10);
  }

  private get calibration(): OutputCalibration | null {
    const pts = this.output?.points;
    return pts && pts.length ? createOutputCalibration(pts) : null;
  }

  // ---------------------------------------------------------------- tone

  private async askTone(): Promise<void> {
    this.problem = '';
    const hz = this.read('tone-hz', 'Tone frequency (Hz)', TONE_MIN_HZ, Math.floor(0.45 * this.sampleRate));
    if (hz === null) return;
    const dbfs = this.read('tone-dbfs', 'Tone level (dBFS)', TONE_DBFS_RANGE[0], this.maxToneDbfs);
    if (dbfs === null) return;
    this.toneHz = hz;
    this.toneDbfs = dbfs;
    await this.updateComplete;
    const d = this.renderRoot.querySelector<HTMLDialogElement>('#tone-confirm');
    if (!d) return;
    d.showModal();
    this.renderRoot.querySelector<HTMLButtonElement>('#tone-confirm-ok')?.focus();
  }

  private confirmTone(ok: boolean): void {
    this.renderRoot.querySelector<HTMLDialogElement>('#tone-confirm')?.close();
    if (ok) emit(this, 'ancb-tone', { hz: this.toneHz, dbfs: this.toneDbfs });
  }

  private saveReading(): void {
    this.problem = '';
    const spl = this.read('spl-reading', 'Sound level meter reading (dB SPL)', -50, 200);
    if (spl === null) return;
    emit(this, 'ancb-tone-save', { measuredDbSpl: spl });
  }

  // ---------------------------------------------------------------- SPL cap

  private applySplCap(): void {
    this.problem = '';
    const v = this.read('spl-cap', 'Cap at the ear position (dB SPL, peak)', SPL_CAP_RANGE[0], SPL_CAP_RANGE[1]);
    if (v !== null) emit(this, 'ancb-spl-cap', { peakDbSpl: v });
  }

  // ---------------------------------------------------------------- microphone

  private measureMic(): void {
    this.problem = '';
    const known = this.read('mic-known', 'Known level (dB SPL)', 0, 200);
    if (known === null) return;
    const hz = this.read('mic-hz', 'Source frequency (Hz)', 1, 0.45 * this.sampleRate);
    if (hz === null) return;
    const from = this.read('mic-from', 'Flat from (Hz)', 1, hz);
    if (from === null) return;
    const to = this.read('mic-to', 'Flat to (Hz)', hz, 0.5 * this.sampleRate);
    if (to === null) return;
    emit(this, 'ancb-mic-measure', { knownDbSpl: known, hz, validFromHz: from, validToHz: to, seconds: MIC_RECORD_S });
  }

  // ---------------------------------------------------------------- render

  private renderTable(cal: OutputCalibration): unknown {
    const cap = this.effective?.ceilingDbfs ?? this.capDbfs;
    return html`<table id="cal-table" aria-label="output calibration readings">
      <thead>
        <tr><th>Frequency</th><th>Tone at output</th><th>Measured</th><th title="The RMS SPL at the ear that a full-scale sine (0 dBFS) at the output would give, from this reading">dB SPL at 0 dBFS</th><th title="Peak SPL the applied cap allows at this frequency">Cap here</th><th><span class="muted">remove</span></th></tr>
        <tr class="small muted"><th>Hz</th><th>dBFS</th><th>dB SPL</th><th>dB SPL at 0 dBFS</th><th>dB SPL peak</th><th></th></tr>
      </thead>
      <tbody>
        ${cal.points.map((p) => {
          const capSpl = dbfsToDbSpl(cal, cap, p.hz);
          const capPeak = capSpl.value === null ? null : capSpl.value + SINE_CREST_DB;
          return html`<tr data-hz=${String(p.hz)}>
            <td>${fmtHz(p.hz)}</td>
            <td data-field="dbfs" data-value=${dv(p.dbfs)}>${fmtDb(p.dbfs, 2)}</td>
            <td data-field="measured" data-value=${dv(p.measuredDbSpl)}>${fmtDb(p.measuredDbSpl, 1)}</td>
            <td data-field="sensitivity" data-value=${dv(p.sensitivityDbSpl)}>${fmtDb(p.sensitivityDbSpl, 2)}</td>
            <td data-field="cap-spl" data-value=${dv(capPeak)}>${fmtDb(capPeak ?? NaN, 1)}</td>
            <td><button class="small" aria-label=${`Remove the reading at ${fmtHz(p.hz)}`} @click=${() => emit(this, 'ancb-cal-remove', { hz: p.hz })}>✕</button></td>
          </tr>`;
        })}
      </tbody>
    </table>`;
  }

  private renderSplCap(cal: OutputCalibration): unknown {
    const peak = this.output?.peakCeilingDbSpl ?? null;
    const rule = peak !== null ? ceilingDbfsForPeakSpl(cal, peak) : null;
    const eff = this.effective;
    return html`<div class="grid">
        <label for="spl-cap">Cap at the ear</label>
        <span class="pair"><input id="spl-cap" type="number" min=${SPL_CAP_RANGE[0]} max=${SPL_CAP_RANGE[1]} step="0.5" .value=${peak === null ? '' : String(peak)} placeholder="none" /><span class="small muted">dB SPL peak</span></span>
      </div>
      <div class="row">
        <button id="spl-cap-apply" @click=${this.applySplCap}>Set SPL cap</button>
        <button id="spl-cap-clear" ?disabled=${peak === null} @click=${() => emit(this, 'ancb-spl-cap', { peakDbSpl: null })}>Clear SPL cap</button>
      </div>
      ${rule
        ? html`<p class="small" id="spl-rule">
            ${fmtDb(peak!, 1)} dB SPL peak is
            <b id="spl-ceiling-dbfs" data-value=${dv(rule.ceilingDbfs)} data-uncapped=${dv(rule.uncappedDbfs)}>${fmtDb(rule.ceilingDbfs, 2)} dBFS</b>
            with the highest sensitivity measured (${fmtDb(rule.peakSensitivityDbSpl - SINE_CREST_DB, 2)} dB SPL RMS at ${fmtHz(rule.limitingHz)}, + ${SINE_CREST_DB.toFixed(2)} dB for a sine's peak).
            SPL caps are peak-based. The stricter of this and the ${fmtDb(this.capDbfs, 1)} dBFS cap applies:
            <b id="effective-cap" data-value=${dv(eff?.ceilingDbfs)} data-limited-by=${eff?.limitedBy ?? ''}>${fmtDb(eff?.ceilingDbfs ?? NaN, 2)} dBFS, set by the ${eff?.limitedBy === 'spl' ? 'SPL' : 'dBFS'} cap</b>.
          </p>`
        : html`<p class="small muted">No SPL cap: the ${fmtDb(this.capDbfs, 1)} dBFS cap applies alone.</p>`}`;
  }

  private renderOutput(): unknown {
    const cal = this.calibration;
    const t = this.tone;
    const playing = t !== null;
    const maxDb = this.maxToneDbfs;
    return html`<h3>Output: loudspeaker at the ear position</h3>
      <p class="small">Output device: <b>${this.outputLabel}</b>. Play a tone, read the SPL at the ear position on a sound level meter (frequency weighting Z or C, time weighting S, as IEC 61672-1 names them), and enter it. Take readings across the band you control.</p>
      <p class="small warn" id="lf-warning">Loudspeaker sensitivity varies strongly at low frequencies (a small speaker falls off steeply below its resonance, and room modes add peaks and dips): measure at several frequencies. Between readings the panel interpolates; outside them SPL is unknown.</p>
      ${!playing
        ? html`<div class="grid">
              <label for="tone-hz">Tone frequency</label>
              <span class="pair"><input id="tone-hz" type="number" list="tone-hz-list" min=${TONE_MIN_HZ} max=${Math.floor(0.45 * this.sampleRate)} step="any" .value=${String(this.toneHz)} /><span class="small muted">Hz</span></span>
              <label for="tone-dbfs">Tone level</label>
              <span class="pair"><input id="tone-dbfs" type="number" min=${TONE_DBFS_RANGE[0]} max=${maxDb} step="1" .value=${String(Math.min(this.toneDbfs, maxDb))} /><span class="small muted">dBFS (at most ${fmtDb(maxDb, 1)}: below the cap)</span></span>
            </div>
            <datalist id="tone-hz-list">${SUGGESTED_HZ.map((f) => html`<option value=${String(f)}></option>`)}</datalist>
            <div class="row"><button id="tone-play" class="primary" ?disabled=${!this.open || this.busy !== ''} @click=${() => void this.askTone()}>Play calibration tone…</button></div>
            ${!this.open ? html`<p class="small muted">Open the microphones and output first (Start).</p>` : ''}`
        : html`<div class="playing" role="status">
            <p><b>Playing ${fmtHz(t.hz)} at ${fmtDb(t.dbfs, 1)} dBFS.</b> Read the meter at the ear position, enter the reading, then save it. The tone stops by itself after ${TONE_MAX_S / 60} minutes.</p>
            <div class="grid">
              <label for="spl-reading">Meter reading</label>
              <span class="pair"><input id="spl-reading" type="number" min="-50" max="200" step="0.1" /><span class="small muted">dB SPL</span></span>
            </div>
            <div class="row">
              <button id="tone-save" class="primary" ?disabled=${this.busy !== ''} @click=${this.saveReading}>Save reading and stop</button>
              <button id="tone-stop" ?disabled=${this.busy !== ''} @click=${() => emit(this, 'ancb-tone-stop')}>Stop without saving</button>
            </div>
          </div>`}
      ${cal
        ? html`${this.renderTable(cal)}
            <p class="small" id="cal-range" data-min=${String(cal.minHz)} data-max=${String(cal.maxHz)}>The calibration holds for <b>${fmtHz(cal.minHz)} … ${fmtHz(cal.maxHz)}</b>${cal.points.length === 1 ? ' (one frequency only: take more readings)' : ''}; SPL figures outside this range are unknown.</p>
            ${this.renderSplCap(cal)}`
        : html`<p class="muted" id="no-output-cal">No output calibration for this device: SPL at the ear position is unknown, and the panel shows none.</p>`}
      <dialog id="tone-confirm" aria-labelledby="tc-h" @cancel=${(e: Event) => { e.preventDefault(); this.confirmTone(false); }}>
        <h2 id="tc-h">Play a calibration tone?</h2>
        <p>A steady <b>${fmtHz(this.toneHz)}</b> tone at <b>${fmtDb(this.toneDbfs, 1)} dBFS</b> will play through <b>${this.outputLabel}</b> until you save the reading or stop it. Control switches off while it plays.</p>
        <p class="warn">Turn the volume down before you start and raise it only until the meter reads clearly above the room's noise. Stop at any discomfort.</p>
        <div class="buttons">
          <button id="tone-confirm-cancel" @click=${() => this.confirmTone(false)}>Cancel</button>
          <button id="tone-confirm-ok" class="primary" @click=${() => this.confirmTone(true)}>Play</button>
        </div>
      </dialog>`;
  }

  private renderMic(): unknown {
    const m = this.mic;
    return html`<h3>Error microphone (optional)</h3>
      <p class="small">Microphone: <b>${this.micLabel}</b>. Put a sound calibrator on it, or play a steady tone and read its SPL at the microphone with a sound level meter; enter the level and frequency, then record ${MIC_RECORD_S} s.</p>
      <div class="grid">
        <label for="mic-known">Known level</label>
        <span class="pair"><input id="mic-known" type="number" min="0" max="200" step="0.1" .value=${m ? String(m.knownDbSpl) : '94'} /><span class="small muted">dB SPL</span></span>
        <label for="mic-hz">Frequency</label>
        <span class="pair"><input id="mic-hz" type="number" min="1" step="any" .value=${m ? String(m.calibration.hz) : '1000'} /><span class="small muted">Hz</span></span>
        <label for="mic-from">Flat from</label>
        <span class="pair"><input id="mic-from" type="number" min="1" step="any" .value=${m ? String(m.calibration.validFromHz) : '1000'} /><span class="small muted">Hz (as the microphone's data sheet states)</span></span>
        <label for="mic-to">Flat to</label>
        <span class="pair"><input id="mic-to" type="number" min="1" step="any" .value=${m ? String(m.calibration.validToHz) : '1000'} /><span class="small muted">Hz</span></span>
      </div>
      <div class="row">
        <button id="mic-measure" ?disabled=${!this.open || this.busy !== ''} @click=${this.measureMic}>${this.busy === 'mic' ? 'Recording…' : `Record ${MIC_RECORD_S} s and calibrate`}</button>
        <button id="mic-clear" ?disabled=${!m} @click=${() => emit(this, 'ancb-mic-clear')}>Forget</button>
      </div>
      ${m
        ? html`<p class="small" id="mic-result">0 dBFS at this input is <b id="mic-sensitivity" data-value=${dv(m.calibration.sensitivityDbSpl)}>${fmtDb(m.calibration.sensitivityDbSpl, 2)} dB SPL</b> (recorded ${fmtDb(m.measuredDbfs, 2)} dBFS for ${fmtDb(m.knownDbSpl, 1)} dB SPL at ${fmtHz(m.calibration.hz)}); the error meter reads dB SPL for sound within ${fmtHz(m.calibration.validFromHz)} … ${fmtHz(m.calibration.validToHz)}.</p>`
        : html`<p class="small muted" id="no-mic-cal">Not calibrated: the error mic reads dBFS only.</p>`}`;
  }

  protected override render(): unknown {
    return html`<section class="card" aria-labelledby="cal-h">
      <h2 id="cal-h">Calibration (dB SPL)</h2>
      ${this.renderOutput()} ${this.renderMic()}
      <p class="problem" role="alert">${this.problem}</p>
    </section>`;
  }
}

if (!customElements.get('ancb-calibration')) customElements.define('ancb-calibration', AncbCalibration);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-calibration': AncbCalibration;
  }
}
