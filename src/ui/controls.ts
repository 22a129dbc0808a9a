/**
 * <ancb-controls>: the controller's settings. Every field has a label with its unit and works from
 * the keyboard (native form controls). Changes are validated here (range and value named in the
 * message) and announced with an `ancb-settings` event carrying the whole new settings object; the
 * reset button fires `ancb-reset-weights`.
 *
 * Step size and output cap have a slider and a number field bound together: the slider for quick
 * moves in a demonstration, the field for an exact value. The step-size slider is logarithmic.
 *
 * The settings carry the other controller family's last settings as `standby` (the tone follower
 * beside broadband FxLMS, or the reverse), so the engine can keep it ready and a switch of algorithm
 * crossfades instead of restarting. `capNote` (set by the panel) says which cap applies when an SPL
 * cap from a calibration is stricter than the dBFS one.
 *
 * Implementation (broadband only): automatic (the engine chooses from the filter lengths and what the
 * platform runs, src/engine/implementation.ts) or forced. The frequency-domain choices update once
 * per block, so they set `update: 'block'`; leaving them restores the update the time domain had.
 * `runsAs` (set by the panel from the audio thread's report) says what runs the controller now;
 * `refusal` (set by the panel) is the engine's message when it refused a setting.
 */
import { LitElement, css, html } from 'lit';
import { shared, formLayout } from './theme.ts';
import type { ControlSettings } from '../web/session.ts';
import type { BroadbandControllerConfig, ControllerConfig, TonalSettings } from '../web/index.ts';
import './plant-options.ts';
import type { PlantOptions } from './plant-options.ts';
import type { FxlmsConfig } from '../web/index.ts';
import type { FxlmsImplementationSettings } from '../web/index.ts';
import { emit } from './emit.ts';
import { FXLMS_SETTINGS, LIMITER_SETTINGS, TONAL_SETTINGS } from '../web/index.ts';
import { switchNote } from './controller-text.ts';

/** A broadband (FxLMS / FxNLMS) configuration with its implementation fields. */
type BroadbandConfig = BroadbandControllerConfig;

/** The Implementation select's options: value, label, and the configuration fields each sets. */
export const IMPLEMENTATION_CHOICES = [
  { value: 'auto', label: 'Automatic', set: { implementation: 'auto' } },
  { value: 'js', label: 'TypeScript time domain', set: { implementation: 'js' } },
  { value: 'wasm', label: 'wasm SIMD time domain', set: { implementation: 'wasm' } },
  { value: 'fd-full', label: 'frequency domain (full constraint)', set: { implementation: 'fd', fdConstraint: 'full' } },
  { value: 'fd-alternating', label: 'frequency domain (alternating constraint)', set: { implementation: 'fd', fdConstraint: 'alternating' } },
] as const satisfies readonly { value: string; label: string; set: FxlmsImplementationSettings }[];

export type ImplementationChoice = (typeof IMPLEMENTATION_CHOICES)[number]['value'];

/** The select's value for a configuration (the frequency domain's constraint defaults to full). */
export function implementationChoice(c: BroadbandConfig): ImplementationChoice {
  if (c.implementation === 'fd') return c.fdConstraint === 'alternating' ? 'fd-alternating' : 'fd-full';
  return c.implementation ?? 'auto';
}

/** Ranges of the number fields: from the settings tables (src/engine/settings.ts), as the scenario schema and the engine check them. */
const range = (spec: { min: number; max: number }): [number, number] => [spec.min, spec.max];
export const HARMONICS_RANGE = range(TONAL_SETTINGS.harmonics);
export const TONE_HZ_RANGE: [number, number] = [20, 2000];
export const DEFAULT_FX: FxlmsConfig = { algorithm: 'fxnlms', taps: 64, stepSize: 0.002 };
export const DEFAULT_TONAL: TonalSettings = { algorithm: 'tonal', harmonics: 1, stepSize: 0.005, frequencySource: 'reference' };

/** The standby for a controller: the other family's defaults. */
export function defaultStandby(c: ControllerConfig): ControllerConfig {
  return c.algorithm === 'tonal' ? { ...DEFAULT_FX } : { ...DEFAULT_TONAL };
}

export const TAPS_RANGE = range(FXLMS_SETTINGS.taps);
export const LEAK_RANGE = range(FXLMS_SETTINGS.leakage);
/**
 * Spans of the logarithmic step-size slider and of the cap slider: the part of each setting's range a
 * demonstration moves through (the tables allow more; a scenario file may use the rest). Both lie
 * inside the tables' ranges: μ > 0 (tone follower μ < 2), cap −120 … 0 dBFS.
 */
export const STEP_RANGE: [number, number] = [1e-6, 2];
export const TONAL_STEP_RANGE: [number, number] = [1e-6, 1.99];
export const CAP_RANGE: [number, number] = [-40, LIMITER_SETTINGS.ceilingDbfs.max];

export class AncbControls extends LitElement {
  static override properties = {
    settings: { attribute: false },
    capNote: {},
    runsAs: {},
    refusal: {},
    oneMic: { type: Boolean },
    problem: { state: true },
  };
  /** One-mic layout (live, error mic only): broadband control and the reference-mic tone source are not offered. */
  declare oneMic: boolean;

  static override styles = [
    shared,
    formLayout,
    css`
      /* a block of its own (two checkboxes and their hints): the whole row, so label/field pairs stay paired */
      ancb-plant-options {
        grid-column: 1 / -1;
      }
      .pair input[type='number'] {
        width: 5.5rem;
        min-width: 0;
      }
      .unit {
        color: var(--ancb-muted);
        font-size: 0.85rem;
      }
      .row {
        display: flex;
        gap: 0.6rem;
        align-items: center;
        flex-wrap: wrap;
        margin-top: 0.7rem;
      }
      .problem {
        color: var(--ancb-danger);
        min-height: 1.2em;
        margin: 0.4rem 0 0;
        font-size: 0.9rem;
      }
      .check {
        display: flex;
        align-items: center;
        gap: 0.45rem;
        font-weight: 600;
      }
      .name {
        font-weight: 600;
      }
      #runs-as {
        font-family: var(--ancb-mono);
        font-size: 0.9rem;
      }
      .check input {
        width: 1.3rem;
        height: 1.3rem;
        accent-color: var(--ancb-accent);
      }
    `,
  ];

  declare settings: ControlSettings;
  declare problem: string;
  /** Which cap applies (the panel's text; empty when the dBFS cap alone applies). */
  declare capNote: string;
  /** What runs the controller now (the audio thread's words; '' when nothing runs). */
  declare runsAs: string;
  /** The engine's refusal of the last settings ('' when none). */
  declare refusal: string;

  constructor() {
    super();
    this.settings = { controller: DEFAULT_FX, ceilingDbfs: -6, adaptation: true, standby: DEFAULT_TONAL };
    this.problem = '';
    this.capNote = '';
    this.runsAs = '';
    this.refusal = '';
    this.oneMic = false;
  }

  override willUpdate(changed: Map<string, unknown>): void {
    // settings given by the panel (a scenario, a reload): remember each family's settings from them
    if (changed.has('settings')) {
      const { controller: c, standby: sb } = this.settings;
      if (c.algorithm === 'tonal') this.lastTonal = c;
      else this.noteFx(c);
      if (sb && sb.algorithm === 'tonal' && c.algorithm !== 'tonal') this.lastTonal = sb;
      if (sb && sb.algorithm !== 'tonal' && c.algorithm === 'tonal') this.lastFx = sb;
    }
  }

  private emit(next: ControlSettings): void {
    const c = next.controller;
    next = { ...next, standby: c.algorithm === 'tonal' ? this.lastFx : this.lastTonal };
    this.settings = next;
    this.problem = '';
    emit(this, 'ancb-settings', next);
  }

  private numberIn(e: Event, field: string, [lo, hi]: [number, number], integer = false): number | null {
    const input = e.target as HTMLInputElement;
    const v = Number(input.value);
    if (input.value.trim() === '' || !Number.isFinite(v) || v < lo || v > hi || (integer && !Number.isInteger(v))) {
      this.problem = `${field} must be ${integer ? 'a whole number' : 'a number'} from ${lo} to ${hi}, got "${input.value}"`;
      return null;
    }
    return v;
  }

  // the last settings of each controller family, so switching back and forth keeps them
  private lastFx: BroadbandConfig = DEFAULT_FX;
  private lastTonal: TonalSettings = DEFAULT_TONAL;
  /** The update of the last time-domain broadband settings, restored when the frequency domain is left. */
  private timeDomainUpdate: FxlmsConfig['update'] = undefined;

  private noteFx(c: BroadbandConfig): void {
    this.lastFx = c;
    if (c.implementation !== 'fd') this.timeDomainUpdate = c.update;
  }

  private setController(c: ControllerConfig): void {
    if (c.algorithm === 'tonal') this.lastTonal = c;
    else this.noteFx(c);
    this.emit({ ...this.settings, controller: c });
  }

  private setImplementation(e: Event): void {
    const c = this.settings.controller;
    const choice = IMPLEMENTATION_CHOICES.find((o) => o.value === (e.target as HTMLSelectElement).value);
    if (c.algorithm === 'tonal' || !choice) return;
    const { implementation: _i, fdConstraint: _f, update: _u, ...rest } = c;
    const fd = choice.set.implementation === 'fd';
    const update = fd ? 'block' : this.timeDomainUpdate;
    this.setController({ ...rest, ...choice.set, ...(update !== undefined ? { update } : {}) });
  }

  private setAlgorithm(e: Event): void {
    const v = (e.target as HTMLSelectElement).value;
    const c = this.settings.controller;
    if (c.algorithm === 'tonal') this.lastTonal = c;
    else this.noteFx(c);
    const { feedbackNeutralisation: fbn, ...fx } = this.lastFx;
    // "imc" has no reference microphone, so no feedback neutralisation
    this.setController(v === 'tonal' ? this.lastTonal : v === 'imc' ? { ...fx, algorithm: 'imc' } : { ...fx, ...(fbn !== undefined ? { feedbackNeutralisation: fbn } : {}), algorithm: v === 'fxlms' ? 'fxlms' : 'fxnlms' } as BroadbandConfig);
  }

  private setTaps(e: Event): void {
    const c = this.settings.controller;
    const v = this.numberIn(e, 'Filter length', TAPS_RANGE, true);
    if (v !== null && c.algorithm !== 'tonal') this.setController({ ...c, taps: v });
  }

  private setHarmonics(e: Event): void {
    const c = this.settings.controller;
    const v = this.numberIn(e, 'Harmonics', HARMONICS_RANGE, true);
    if (v !== null && c.algorithm === 'tonal') this.setController({ ...c, harmonics: v });
  }

  private setSource(source: 'reference' | 'error' | 'fixed', hz?: number): void {
    const c = this.settings.controller;
    if (c.algorithm !== 'tonal') return;
    const { hz: _old, ...rest } = c;
    const fixedHz = hz ?? c.hz ?? 100;
    this.setController(source === 'fixed' ? { ...rest, frequencySource: 'fixed', hz: fixedHz } : { ...rest, frequencySource: source });
  }

  private setStep(v: number): void {
    this.setController({ ...this.settings.controller, stepSize: v });
  }

  private setLeak(e: Event): void {
    const v = this.numberIn(e, 'Leakage', LEAK_RANGE);
    if (v !== null) this.setController({ ...this.settings.controller, leakage: v });
  }

  /** Online path model and feedback neutralisation (src/ui/plant-options.ts). */
  private setPlantOptions(o: PlantOptions): void {
    const c = this.settings.controller;
    if (c.algorithm === 'tonal') return;
    const { onlineModel: _o, feedbackNeutralisation: _f, ...rest } = c;
    this.setController({ ...rest, ...(o.onlineModel ? { onlineModel: o.onlineModel } : {}), ...(o.feedbackNeutralisation && c.algorithm !== 'imc' ? { feedbackNeutralisation: true } : {}) } as BroadbandConfig);
  }

  private setCap(v: number): void {
    this.emit({ ...this.settings, ceilingDbfs: v });
  }

  private renderTonal(c: TonalSettings): unknown {
    const src = c.frequencySource === 'fixed' ? 'fixed' : c.frequencySource === 'error' ? 'error' : 'reference';
    return html`<label for="harmonics">Harmonics</label>
      <span class="pair"><input id="harmonics" type="number" min=${HARMONICS_RANGE[0]} max=${HARMONICS_RANGE[1]} step="1" .value=${String(c.harmonics)} @change=${this.setHarmonics} /><span class="unit">f₀ … ${c.harmonics}·f₀</span></span>
      <label for="fsrc">Tone from</label>
      <select id="fsrc" @change=${(e: Event) => this.setSource((e.target as HTMLSelectElement).value as 'reference' | 'error' | 'fixed')}>
        <option value="reference" ?selected=${src === 'reference'} ?disabled=${this.oneMic}>reference mic (tracked)${this.oneMic ? ' — needs a reference mic' : ''}</option>
        <option value="error" ?selected=${src === 'error'}>error mic (tracked, one-mic mode)</option>
        <option value="fixed" ?selected=${src === 'fixed'}>fixed frequency</option>
      </select>
      ${src === 'fixed'
        ? html`<label for="hz">Frequency</label>
            <span class="pair"><input id="hz" type="number" min=${TONE_HZ_RANGE[0]} max=${TONE_HZ_RANGE[1]} step="any" .value=${String(c.hz ?? 100)}
              @change=${(e: Event) => { const v = this.numberIn(e, 'Frequency', TONE_HZ_RANGE); if (v !== null) this.setSource('fixed', v); }} /><span class="unit">Hz</span></span>`
        : ''}`;
  }

  private renderImplementation(c: BroadbandConfig): unknown {
    const choice = implementationChoice(c);
    return html`<label for="impl">Implementation</label>
      <select id="impl" @change=${this.setImplementation} .value=${choice}>
        ${IMPLEMENTATION_CHOICES.map((o) => html`<option value=${o.value} ?selected=${o.value === choice}>${o.label}</option>`)}
      </select>
      <span></span><span class="unit">${choice === 'auto'
        ? 'from the filter lengths and what this browser runs'
        : choice.startsWith('fd')
          ? 'updates once per block; partition = block size (a power of two)'
          : 'forced; refused where it cannot run'}</span>`;
  }

  protected override render(): unknown {
    const c = this.settings.controller;
    const logMu = Math.log10(c.stepSize);
    const normalised = c.algorithm !== 'fxlms';
    return html`<section class="card" aria-labelledby="ctl-h">
      <h2 id="ctl-h">Controller</h2>
      <div class="grid">
        <label for="alg">Algorithm</label>
        <select id="alg" @change=${this.setAlgorithm} .value=${c.algorithm}>
          <option value="fxnlms" ?selected=${c.algorithm === 'fxnlms'} ?disabled=${this.oneMic}>FxNLMS (broadband, normalised)${this.oneMic ? ' — needs a reference mic' : ''}</option>
          <option value="fxlms" ?selected=${c.algorithm === 'fxlms'} ?disabled=${this.oneMic}>FxLMS (broadband)${this.oneMic ? ' — needs a reference mic' : ''}</option>
          <option value="tonal" ?selected=${c.algorithm === 'tonal'}>Tone follower (narrowband)</option>
          <option value="imc" ?selected=${c.algorithm === 'imc'}>Broadband, error mic only (IMC)</option>
        </select>
        <span></span><span class="unit" id="switch-note">${switchNote(c, this.settings.standby)}</span>

        ${c.algorithm === 'tonal' ? this.renderTonal(c) : html`<label for="taps">Filter length</label>
        <span class="pair"><input id="taps" type="number" min=${TAPS_RANGE[0]} max=${TAPS_RANGE[1]} step="1" .value=${String(c.taps)} @change=${this.setTaps} /><span class="unit">taps</span></span>
        ${this.renderImplementation(c)}
        <ancb-plant-options .controller=${c} @ancb-plant-options=${(e: CustomEvent<PlantOptions>) => this.setPlantOptions(e.detail)}></ancb-plant-options>`}
        <span class="name" id="runs-as-l">Runs as</span>
        <output id="runs-as" aria-labelledby="runs-as-l" aria-live="polite">${this.runsAs || html`<span class="unit">shown once the audio runs</span>`}</output>

        <label for="mu">Step size μ</label>
        <span class="pair">
          <input id="mu-slider" type="range" min="-6" max="0.3" step="0.05" .value=${String(logMu)} aria-label="Step size μ, logarithmic slider"
            aria-valuetext=${c.stepSize.toPrecision(3)}
            @input=${(e: Event) => this.setStep(Number(Math.pow(10, Number((e.target as HTMLInputElement).value)).toPrecision(3)))} />
          <input id="mu" type="number" min=${STEP_RANGE[0]} max=${STEP_RANGE[1]} step="any" .value=${String(c.stepSize)}
            @change=${(e: Event) => { const v = this.numberIn(e, 'Step size', c.algorithm === 'tonal' ? TONAL_STEP_RANGE : STEP_RANGE); if (v !== null) this.setStep(v); }} />
        </span>
        <span></span><span class="unit">${c.algorithm === 'tonal' ? 'normalised per harmonic, 0 < μ < 2; error time constant ≈ 2/μ samples' : normalised ? 'normalised, stable for 0 < μ < 2 (less with a long secondary-path delay)' : 'in 1/(power × taps); keep well below 2/(L·P_f)'}</span>

        <label for="leak">Leakage γ</label>
        <span class="pair"><input id="leak" type="number" min="0" max=${LEAK_RANGE[1]} step="any" .value=${String(c.leakage ?? 0)} @change=${this.setLeak} /><span class="unit">w ← (1 − μγ)·w</span></span>

        <label for="cap">Output cap</label>
        <span class="pair">
          <input id="cap-slider" type="range" min=${CAP_RANGE[0]} max=${CAP_RANGE[1]} step="0.5" .value=${String(this.settings.ceilingDbfs)} aria-label="Output cap in dBFS, slider"
            aria-valuetext=${`${this.settings.ceilingDbfs} dBFS`}
            @input=${(e: Event) => this.setCap(Number((e.target as HTMLInputElement).value))} />
          <input id="cap" type="number" min=${CAP_RANGE[0]} max=${CAP_RANGE[1]} step="0.5" .value=${String(this.settings.ceilingDbfs)}
            @change=${(e: Event) => { const v = this.numberIn(e, 'Output cap', CAP_RANGE); if (v !== null) this.setCap(v); }} /><span class="unit">dBFS peak</span>
        </span>
        ${this.capNote ? html`<span></span><span class="unit" id="cap-note">${this.capNote}</span>` : ''}
      </div>
      <div class="row">
        <label class="check"><input id="adapt" type="checkbox" .checked=${this.settings.adaptation}
          @change=${(e: Event) => this.emit({ ...this.settings, adaptation: (e.target as HTMLInputElement).checked })} />Adapt (clear to pause: weights frozen)</label>
        <button id="reset" @click=${() => emit(this, 'ancb-reset-weights')}>Reset weights</button>
      </div>
      <p class="problem" role="alert">${this.problem || this.refusal}</p>
    </section>`;
  }
}

if (!customElements.get('ancb-controls')) customElements.define('ancb-controls', AncbControls);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-controls': AncbControls;
  }
}
