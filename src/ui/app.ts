/**
 * <ancb-app>: the control panel. It owns the audio session (src/web/session.ts) and a display loop
 * (requestAnimationFrame) that reads meter frames, draws the meters on canvas and feeds the plots;
 * Lit renders the structure and re-renders only on state changes (start, stop, settings, events).
 *
 * Opens in simulated-plant mode on the first scenario given (the page passes the demo scenarios);
 * the switch at the top moves to live microphones, behind the hearing-safety cautions.
 */
import '../web/zod-jitless.ts';
import { LitElement, css, html } from 'lit';
import { shared, applyTheme, initialTheme, type ThemeName } from './theme.ts';
import { FrameLoop } from './frame-loop.ts';
import { DisplayState } from './display-state.ts';
import { fmtDb, fmtHz } from './format.ts';
import { AncbMeter } from './meter-bar.ts';
import { AncbPlot, type PlotConfig } from './plot.ts';
import { AncbEvents } from './events-list.ts';
import { AncbCautions } from './cautions.ts';
import './controls.ts';
import './sim-source.ts';
import './live-setup.ts';
import type { AncbTones } from './tones.ts';
import './tones.ts';
import type { ScenarioEntry } from './sim-source.ts';
import type { AncbLiveSetup } from './live-setup.ts';
import { Session, defaultProbe, type ControlSettings, type ModelInfo } from '../web/session.ts';
import { analysis } from '../web/analysis-client.ts';
import { engineControllerConfig } from '../plant/simulate.ts';
import { listDevices, loadChoice, reconcileChoice, requestMicrophonePermission, saveChoice, type DeviceChoice, type DeviceLists } from '../web/devices.ts';
import { causalityVerdict, type CausalityVerdict, type GeometryResult, type IdentificationResult } from '../analysis/live-analysis.ts';
import type { PanelEvent } from '../engine/messages.ts';

const PLOT_INTERVAL_MS = 100;
const SPECTRUM_INTERVAL_MS = 500;

const SPECTRUM: PlotConfig = {
  xLabel: 'frequency (Hz)',
  yLabel: 'PSD (dB re FS²/Hz)',
  xLog: true,
  series: [
    { label: 'control off', colorVar: '--ancb-series-off', unit: 'dB' },
    { label: 'control on', colorVar: '--ancb-series-on', unit: 'dB' },
  ],
};
const ATTENUATION: PlotConfig = {
  xLabel: 'time (s)',
  yLabel: 'attenuation (dB)',
  series: [
    { label: 'now', colorVar: '--ancb-series-now', unit: 'dB' },
    { label: 'averaged', colorVar: '--ancb-series-avg', unit: 'dB', width: 3 },
  ],
};
const IMPULSE: PlotConfig = {
  xLabel: 'time (ms)',
  yLabel: 'amplitude',
  decimals: 4,
  series: [
    { label: 'model', colorVar: '--ancb-series-model' },
    { label: 'true path', colorVar: '--ancb-series-true', dash: [6, 4] },
  ],
};
const MAGNITUDE: PlotConfig = {
  xLabel: 'frequency (Hz)',
  yLabel: 'magnitude (dB)',
  xLog: true,
  series: [{ label: 'model', colorVar: '--ancb-series-model', unit: 'dB' }],
};
const TONE: PlotConfig = {
  xLabel: 'time (s)',
  yLabel: 'frequency (Hz)',
  series: [{ label: 'tracked tone', colorVar: '--ancb-series-now', unit: 'Hz' }],
};

/** Output cap applied when switching to live microphones, dBFS (start low). */
export const LIVE_START_CAP_DBFS = -20;

export const DEFAULT_SETTINGS: ControlSettings = { controller: { algorithm: 'fxnlms', taps: 64, stepSize: 0.002 }, ceilingDbfs: -6, adaptation: true };

export class AncbApp extends LitElement {
  static override properties = {
    scenarios: { attribute: false },
    source: { state: true },
    running: { state: true },
    controlOn: { state: true },
    busy: { state: true },
    status: { state: true },
    warnings: { state: true },
    stale: { state: true },
    theme: { state: true },
    settings: { state: true },
    scenarioId: { state: true },
    monitorGainDb: { state: true },
    monitorSource: { state: true },
    devices: { state: true },
    choice: { state: true },
    identified: { state: true },
    geometry: { state: true },
    verdict: { state: true },
    modelSource: { state: true },
    measured: { state: true },
    toneSummary: { state: true },
    guardState: { state: true },
  };

  static override styles = [
    shared,
    css`
      :host {
        display: block;
        padding: 0.8rem 1rem 1.2rem;
        max-width: 1800px;
        margin: 0 auto;
      }
      header {
        display: flex;
        flex-wrap: wrap;
        gap: 0.8rem 1.4rem;
        align-items: center;
        margin-bottom: 0.8rem;
      }
      h1 {
        font-size: 1.5rem;
        margin: 0;
        font-weight: 700;
      }
      h1 span {
        font-weight: 400;
        color: var(--ancb-muted);
        font-size: 1rem;
        margin-left: 0.4rem;
      }
      .source {
        display: flex;
        border: 2px solid var(--ancb-line-strong);
        border-radius: 10px;
        overflow: hidden;
      }
      .source label {
        padding: 0.45rem 0.9rem;
        cursor: pointer;
        display: flex;
        gap: 0.4rem;
        align-items: center;
        font-weight: 600;
      }
      .source label.on {
        background: var(--ancb-accent);
        color: var(--ancb-on-accent);
      }
      .source input {
        accent-color: var(--ancb-fg);
      }
      .spacer {
        flex: 1;
      }
      .transport {
        display: flex;
        flex-wrap: wrap;
        align-items: center;
        gap: 0.7rem 1rem;
        margin-bottom: 0.8rem;
      }
      .transport button {
        font-size: 1.1rem;
        min-width: 8rem;
      }
      .status {
        flex: 1;
        min-width: 14rem;
      }
      .banner {
        border: 2px solid var(--ancb-warn);
        border-radius: 10px;
        padding: 0.6rem 0.9rem;
        margin-bottom: 0.8rem;
        display: flex;
        gap: 1rem;
        align-items: center;
        flex-wrap: wrap;
      }
      .layout {
        display: grid;
        grid-template-columns: minmax(20rem, 27rem) 1fr;
        gap: 0.9rem;
        align-items: start;
      }
      @media (max-width: 1000px) {
        .layout {
          grid-template-columns: 1fr;
        }
      }
      aside {
        display: grid;
        gap: 0.9rem;
        min-width: 0;
      }
      aside > * {
        min-width: 0;
      }
      .display {
        display: grid;
        gap: 0.9rem;
        min-width: 0;
      }
      .levels {
        display: grid;
        grid-template-columns: minmax(14rem, auto) 1fr;
        gap: 0.6rem 1.6rem;
        align-items: center;
      }
      @media (max-width: 1300px) {
        .levels {
          grid-template-columns: 1fr;
        }
      }
      .readouts {
        display: grid;
        grid-template-columns: 1fr 1fr;
        gap: 0.4rem 1.2rem;
      }
      .readout .name {
        font-weight: 600;
        display: block;
      }
      .readout output {
        font-family: var(--ancb-mono);
        font-size: 3rem;
        line-height: 1.1;
        font-weight: 700;
        display: block;
      }
      .readout .unit {
        color: var(--ancb-muted);
      }
      #att-now {
        color: var(--ancb-series-now);
      }
      #att-avg {
        color: var(--ancb-series-avg);
      }
      .bars {
        display: grid;
        gap: 0.55rem;
      }
      .plots {
        display: grid;
        grid-template-columns: repeat(auto-fit, minmax(26rem, 1fr));
        gap: 0.9rem;
      }
      .pair {
        display: grid;
        grid-template-columns: 1fr 1fr;
        gap: 0.9rem;
      }
      ul.warnings {
        margin: 0.4rem 0 0;
        padding-left: 1.2rem;
      }
      footer {
        margin-top: 1rem;
        font-size: 0.85rem;
      }
    `,
  ];

  declare scenarios: ScenarioEntry[];
  declare source: 'sim' | 'live';
  declare running: boolean;
  declare controlOn: boolean;
  declare busy: '' | 'start' | 'stop' | 'permission' | 'identify' | 'geometry';
  declare status: string;
  declare warnings: string[];
  declare stale: string;
  declare theme: ThemeName;
  declare settings: ControlSettings;
  declare scenarioId: string;
  declare monitorGainDb: number;
  declare monitorSource: 'on' | 'off';
  declare devices: DeviceLists | null;
  declare choice: DeviceChoice;
  declare identified: IdentificationResult | null;
  /** The last identification, loaded or not. */
  declare measured: IdentificationResult | null;
  declare geometry: GeometryResult | null;
  declare verdict: CausalityVerdict | null;
  declare modelSource: ModelInfo['source'];
  declare toneSummary: string;
  declare guardState: number;

  readonly display = new DisplayState();
  readonly session: Session;
  private cautionsAccepted = false;
  private pendingEvents: PanelEvent[] = [];
  private lastPlotMs = 0;
  private lastSpectrumMs = 0;
  private spectrumPending = false;

  constructor() {
    super();
    this.scenarios = [];
    this.source = 'sim';
    this.running = false;
    this.controlOn = false;
    this.busy = '';
    this.status = 'Stopped. Press Start to run the simulated plant.';
    this.warnings = [];
    this.stale = '';
    this.theme = initialTheme();
    this.settings = structuredClone(DEFAULT_SETTINGS);
    this.scenarioId = '';
    this.monitorGainDb = -18;
    this.monitorSource = 'on';
    this.devices = null;
    this.choice = loadChoice();
    this.identified = null;
    this.measured = null;
    this.geometry = null;
    this.verdict = null;
    this.modelSource = 'none';
    this.toneSummary = '';
    this.guardState = 0;
    applyTheme(this.theme);
    this.session = new Session({
      frame: (f) => this.display.push(f),
      event: (e) => this.pendingEvents.push(e),
      model: (m) => void this.showModel(m),
      stale: (reason) => {
        this.stale = reason;
      },
      warning: (w) => {
        this.warnings = [...this.warnings.slice(-3), w];
      },
    });
    new FrameLoop(this, (t) => this.tick(t));
  }

  override willUpdate(changed: Map<string, unknown>): void {
    if (changed.has('scenarios') && !this.scenarioId && this.scenarios.length) {
      this.scenarioId = this.scenarios[0]!.id;
      this.settings = this.settingsFromScenario(this.scenarios[0]!);
    }
  }

  private settingsFromScenario(e: ScenarioEntry): ControlSettings {
    return {
      controller: engineControllerConfig(e.scenario),
      ceilingDbfs: e.scenario.outputCeilingDbfs ?? DEFAULT_SETTINGS.ceilingDbfs,
      adaptation: true,
    };
  }

  private $<T extends Element>(sel: string): T | null {
    return this.renderRoot.querySelector<T>(sel);
  }

  // ---------------------------------------------------------------- display loop

  private tick(nowMs: number): void {
    this.session.poll();
    if (this.pendingEvents.length) {
      this.$<AncbEvents>('ancb-events')?.add(this.pendingEvents);
      this.pendingEvents = [];
    }
    const d = this.display;
    const live = this.source === 'live';
    const m = (ch: string): AncbMeter | null => this.$<AncbMeter>(`ancb-meter[channel=${ch}]`);
    if (d.frames > 0) {
      m('ref')?.show(live && this.choice.layout === 'err-only' ? NaN : d.refDb, NaN, NaN, nowMs);
      m('err')?.show(d.errDb, NaN, NaN, nowMs);
      m('out')?.show(d.outDb, d.outPeakDb, d.ceilingDb, nowMs);
      m('gr')?.show(d.grDb, NaN, NaN, nowMs);
      this.setReadout('att-now', d.attNowDb);
      this.setReadout('att-avg', d.attAvgDb);
      this.setText('#true-peak', `output true peak (max, 4× oversampled): ${fmtDb(d.maxTruePeakDb)} dBTP · cap ${fmtDb(d.ceilingDb)} dBFS sample peak${d.frozenByLimiter === 1 ? ' · adaptation paused while the limiter works' : ''}`);
      this.$<AncbTones>('ancb-tones')?.show(d, nowMs);
      if (d.guardState !== this.guardState) this.guardState = d.guardState;
      const setup = this.$<AncbLiveSetup>('ancb-live-setup');
      if (setup && this.busy === 'identify') setup.showProgress(d.probeProgress);
    }
    if (nowMs - this.lastPlotMs >= PLOT_INTERVAL_MS && d.histT.length > 1) {
      this.lastPlotMs = nowMs;
      this.$<AncbPlot>('#plot-att')?.setData([d.histT, d.histNow, d.histAvg]);
      if (d.toneT.length > 1) {
        this.$<AncbPlot>('#plot-tone')?.setData([d.toneT, d.toneF]);
        const s = `${fmtHz(d.toneHz)}${d.toneLocked === 1 ? ', locked' : ', searching'}`;
        if (s !== this.toneSummary) this.toneSummary = s;
      }
    }
    if (this.running && !this.spectrumPending && nowMs - this.lastSpectrumMs >= SPECTRUM_INTERVAL_MS) {
      this.lastSpectrumMs = nowMs;
      this.spectrumPending = true;
      void analysis()
        .spectra()
        .then((s) => {
          if (!s) return;
          const lo = Math.max(1, Math.ceil(20 / s.resolutionHz));
          const f = Array.from(s.frequencyHz.subarray(lo));
          const nul = (a: Float64Array): (number | null)[] => Array.from(a.subarray(lo), (v) => (Number.isFinite(v) ? v : null));
          this.$<AncbPlot>('#plot-spectrum')?.setData([f, nul(s.offDb), nul(s.onDb)]);
        })
        .finally(() => {
          this.spectrumPending = false;
        });
    }
  }

  private setText(sel: string, text: string): void {
    const el = this.$<HTMLElement>(sel);
    if (el && el.textContent !== text) el.textContent = text;
  }

  private setReadout(id: string, v: number): void {
    const el = this.$<HTMLOutputElement>(`#${id}`);
    if (!el) return;
    const text = fmtDb(v);
    if (el.textContent !== text) {
      el.textContent = text;
      el.dataset.value = Number.isFinite(v) ? v.toFixed(1) : '';
    }
  }

  private async showModel(m: ModelInfo): Promise<void> {
    this.modelSource = m.source;
    if (m.source === 'none') return;
    const v = await analysis().pathView(m.taps, m.sampleRate, m.truePath);
    await this.updateComplete;
    this.$<AncbPlot>('#plot-impulse')?.setData([Array.from(v.timeMs), Array.from(v.taps), v.truePath ? Array.from(v.truePath) : v.taps.map(() => null as unknown as number)]);
    const lo = 1;
    const hi = v.frequencyHz.length;
    this.$<AncbPlot>('#plot-magnitude')?.setData([Array.from(v.frequencyHz.subarray(lo, hi)), Array.from(v.magnitudeDb.subarray(lo, hi), (x) => (Number.isFinite(x) ? x : null))]);
  }

  // ---------------------------------------------------------------- actions

  private get scenarioEntry(): ScenarioEntry | undefined {
    return this.scenarios.find((s) => s.id === this.scenarioId);
  }

  private async start(): Promise<void> {
    if (this.busy) return;
    if (this.source === 'live' && !this.cautionsAccepted) {
      const ok = await this.$<AncbCautions>('ancb-cautions')!.ask();
      if (!ok) return;
      this.cautionsAccepted = true;
    }
    this.busy = 'start';
    this.warnings = [];
    this.stale = '';
    this.toneSummary = '';
    this.$<AncbEvents>('ancb-events')?.clear();
    try {
      if (this.source === 'sim') {
        const e = this.scenarioEntry;
        if (!e) throw new Error('no scenario to run');
        this.display.reset('sim');
        await this.session.startSim(e.scenario, this.settings, this.monitorGainDb);
        this.session.setMonitor(this.monitorGainDb, this.monitorSource);
        this.status = `Simulated plant “${e.scenario.name ?? e.id}” running at ${this.session.sampleRate / 1000} kHz. Control is off: listen, then press Control.`;
      } else {
        this.display.reset('live');
        const c = this.settings.controller;
        if (this.choice.layout === 'err-only' && (c.algorithm !== 'tonal' || c.frequencySource !== 'error')) {
          this.warnings = [
            ...this.warnings,
            'one-mic layout: choose the tone follower with “Tone from: error mic” under Controller (broadband FxLMS needs a reference mic)',
          ];
        }
        await this.session.startLive(this.choice, this.settings);
        // access was granted by opening the microphones: list the devices for the pickers
        if (!this.devices) void this.refreshDevices();
        this.status = `Microphones open at ${this.session.sampleRate / 1000} kHz. ${this.identified && this.identified.sampleRate === this.session.sampleRate ? 'Model loaded.' : 'Next: identify the secondary path.'}`;
      }
      this.running = true;
      this.controlOn = false;
    } catch (e) {
      this.status = `Could not start: ${(e as Error).message}`;
      await this.session.stop();
      this.running = false;
    } finally {
      this.busy = '';
    }
  }

  private async stop(): Promise<void> {
    this.busy = 'stop';
    await this.session.stop();
    this.running = false;
    this.controlOn = false;
    this.busy = '';
    this.status = 'Stopped.';
  }

  private get canControl(): boolean {
    if (!this.running) return false;
    if (this.source === 'sim') return true;
    return this.identified !== null && this.identified.sampleRate === this.session.sampleRate && this.busy !== 'identify';
  }

  private toggleControl(): void {
    if (!this.canControl) return;
    this.controlOn = !this.controlOn;
    this.session.setControl(this.controlOn);
    this.status = this.controlOn ? 'Control on: the output fades in; watch the attenuation.' : 'Control off: the output fades out.';
  }

  private async setSource(s: 'sim' | 'live'): Promise<void> {
    if (s === this.source) return;
    if (this.running) await this.stop();
    this.source = s;
    this.display.reset(s);
    this.status = s === 'sim' ? 'Stopped. Press Start to run the simulated plant.' : 'Live microphones: allow access, choose devices, then Start.';
    if (s === 'live' && this.settings.ceilingDbfs > LIVE_START_CAP_DBFS) {
      // start low: a real loudspeaker follows
      this.settings = { ...this.settings, ceilingDbfs: LIVE_START_CAP_DBFS };
      this.status += ` The output cap is set to ${LIVE_START_CAP_DBFS} dBFS for a safe start; raise it slowly.`;
    }
  }

  private async onSettings(e: CustomEvent<ControlSettings>): Promise<void> {
    const next = e.detail;
    this.settings = next;
    const how = await this.session.applySettings(next, this.monitorGainDb);
    if (how === 'rebuilt') {
      this.controlOn = false;
      this.status = this.source === 'sim' ? 'Controller rebuilt: the plant restarted with control off.' : 'Controller rebuilt with the current model: control is off, weights start from zero.';
    }
  }

  private async onScenario(id: string): Promise<void> {
    const e = this.scenarios.find((s) => s.id === id);
    if (!e) return;
    this.scenarioId = id;
    this.settings = this.settingsFromScenario(e);
    if (this.running && this.source === 'sim') {
      await this.stop();
      await this.start();
    }
  }

  private async onPermission(): Promise<void> {
    this.busy = 'permission';
    try {
      await requestMicrophonePermission();
      const lists = await listDevices();
      const { choice, missing } = reconcileChoice(this.choice, lists);
      if (missing.length) this.warnings = [...this.warnings, `remembered device(s) not found, using the system default: ${missing.join(', ')}`];
      this.devices = lists;
      this.choice = choice;
      saveChoice(choice);
      navigator.mediaDevices.addEventListener('devicechange', () => void this.refreshDevices());
    } catch (e) {
      this.status = `Microphone access failed: ${(e as Error).message}`;
    } finally {
      this.busy = '';
    }
  }

  private async refreshDevices(): Promise<void> {
    const lists = await listDevices();
    const { choice, missing } = reconcileChoice(this.choice, lists);
    this.devices = lists;
    if (missing.length) {
      this.choice = choice;
      saveChoice(choice);
      this.warnings = [...this.warnings, `device gone (${missing.join(', ')}): switched to the system default. Stop, Start and identify again`];
    }
  }

  private onChoice(c: DeviceChoice): void {
    this.choice = c;
    saveChoice(c);
    if (this.running && this.source === 'live') this.status = 'Device choice changed: press Stop and Start to use it, then identify again.';
  }

  private async onIdentify(probeDbfs: number, firTaps: number): Promise<void> {
    if (this.busy) return;
    if (this.controlOn) this.toggleControl();
    this.busy = 'identify';
    this.status = 'Identifying: a sweep plays through the loudspeaker. Keep quiet for two seconds.';
    try {
      const probe = { ...defaultProbe(this.session.sampleRate), amplitude: Math.pow(10, probeDbfs / 20) };
      const r = await this.session.identify(probe, firTaps);
      this.measured = r;
      if (r.usable) {
        await this.acceptModel(r);
      } else {
        this.status = 'Identification too poor to control with: the model was not loaded. See the notes; identify again, or load it anyway.';
      }
    } catch (e) {
      this.status = `Identification failed: ${(e as Error).message}`;
    } finally {
      this.busy = '';
    }
  }

  private async acceptModel(r: IdentificationResult): Promise<void> {
    await this.session.loadModel(r);
    this.identified = r;
    this.controlOn = false;
    this.stale = '';
    this.verdict = this.geometry?.primaryDelayMs != null ? causalityVerdict(this.geometry.primaryDelayMs, r.delayMs) : null;
    this.status = `Model loaded: round trip ${r.delayMs.toFixed(2)} ms. ${r.warnings.length ? 'See the notes under the result. ' : ''}Press Control to start.`;
  }

  private async onGeometry(): Promise<void> {
    if (this.controlOn) {
      this.status = 'Switch control off first: the geometry is measured on the noise alone.';
      return;
    }
    this.busy = 'geometry';
    try {
      const g = await analysis().measureGeometry();
      this.geometry = g;
      this.verdict = g.primaryDelayMs !== null && this.identified ? causalityVerdict(g.primaryDelayMs, this.identified.delayMs) : null;
      if (g.primaryDelayMs !== null && !this.identified) this.status = `Reference → error mic: ${g.primaryDelayMs.toFixed(2)} ms. Identify the secondary path for the verdict.`;
    } finally {
      this.busy = '';
    }
  }

  private toggleTheme(): void {
    this.theme = this.theme === 'dark' ? 'light' : 'dark';
    applyTheme(this.theme);
    for (const el of this.renderRoot.querySelectorAll<AncbMeter | AncbPlot>('ancb-meter, ancb-plot')) el.themeChanged();
  }

  // ---------------------------------------------------------------- render

  private renderSource(): unknown {
    if (this.source === 'sim') {
      return html`<ancb-sim-source
        .scenarios=${this.scenarios}
        .selectedId=${this.scenarioId}
        .monitorGainDb=${this.monitorGainDb}
        .monitorSource=${this.monitorSource}
        @ancb-scenario=${(e: CustomEvent<string>) => void this.onScenario(e.detail)}
        @ancb-monitor=${(e: CustomEvent<{ gainDb: number; source: 'on' | 'off' }>) => {
          this.monitorGainDb = e.detail.gainDb;
          this.monitorSource = e.detail.source;
          this.session.setMonitor(e.detail.gainDb, e.detail.source);
        }}
      ></ancb-sim-source>`;
    }
    const stats = this.session.stats();
    const reported = stats ? ((Number.isFinite(stats.baseLatencyS) ? stats.baseLatencyS : 0) + (Number.isFinite(stats.outputLatencyS) ? stats.outputLatencyS : 0)) * 1000 : NaN;
    return html`<ancb-live-setup
      .devices=${this.devices}
      .choice=${this.choice}
      .open=${this.running}
      .busy=${this.busy === 'identify' || this.busy === 'geometry' || this.busy === 'permission' ? this.busy : ''}
      .result=${this.measured}
      .loaded=${this.measured !== null && this.measured === this.identified}
      .geometry=${this.geometry}
      .verdict=${this.verdict}
      .reportedLatencyMs=${reported}
      @ancb-permission=${() => void this.onPermission()}
      @ancb-choice=${(e: CustomEvent<DeviceChoice>) => this.onChoice(e.detail)}
      @ancb-identify=${(e: CustomEvent<{ probeDbfs: number; firTaps: number }>) => void this.onIdentify(e.detail.probeDbfs, e.detail.firTaps)}
      @ancb-geometry=${() => void this.onGeometry()}
      @ancb-accept-model=${() => {
        if (this.measured) void this.acceptModel(this.measured).catch((e: Error) => (this.status = `Could not load the model: ${e.message}`));
      }}
    ></ancb-live-setup>`;
  }

  protected override render(): unknown {
    const live = this.source === 'live';
    const canControl = this.canControl;
    const controlHint = !this.running ? 'Start first' : live && !canControl ? 'identify the secondary path first' : '';
    return html`
      <header>
        <h1>ancbench<span>active noise control workbench</span></h1>
        <div class="source" role="radiogroup" aria-label="Signal source">
          <label class=${live ? '' : 'on'}><input type="radio" name="source" value="sim" .checked=${!live} @change=${() => void this.setSource('sim')} />Simulated plant</label>
          <label class=${live ? 'on' : ''}><input type="radio" name="source" value="live" .checked=${live} @change=${() => void this.setSource('live')} />Live microphones</label>
        </div>
        <span class="spacer"></span>
        <button id="safety" @click=${() => void this.$<AncbCautions>('ancb-cautions')!.ask()}>Hearing safety</button>
        <button id="theme" @click=${this.toggleTheme} aria-label=${`Switch to ${this.theme === 'dark' ? 'light' : 'dark'} theme`}>${this.theme === 'dark' ? 'Light theme' : 'Dark theme'}</button>
      </header>

      <div class="card transport">
        ${this.running
          ? html`<button id="start" @click=${() => void this.stop()} ?disabled=${this.busy === 'stop'}>Stop</button>`
          : html`<button id="start" class="primary" @click=${() => void this.start()} ?disabled=${this.busy === 'start'}>${live ? 'Start (open mics)' : 'Start'}</button>`}
        <button id="control" aria-pressed=${String(this.controlOn)} ?disabled=${!canControl} @click=${this.toggleControl} title=${controlHint}>Control: ${this.controlOn ? 'on' : 'off'}</button>
        <span class="status" role="status" aria-live="polite">${this.status}${controlHint && this.running ? html` <span class="muted">(control: ${controlHint})</span>` : ''}</span>
      </div>
      ${this.warnings.length ? html`<div class="card banner" role="alert"><ul class="warnings">${this.warnings.map((w) => html`<li class="warn">${w}</li>`)}</ul><button id="dismiss" @click=${() => (this.warnings = [])}>Dismiss</button></div>` : ''}
      ${this.guardState > 0
        ? html`<div class="card banner" role="alert"><span class="warn"><b>Guard:</b> ${this.guardState === 2 ? 'output muted' : 'adaptation frozen'} (see the events for the cause).</span>
            <button id="resume" class="primary" @click=${() => this.session.post({ type: 'acknowledge' })}>Resume</button></div>`
        : ''}
      ${this.stale
        ? html`<div class="card banner" role="alert"><span class="warn"><b>Adaptation frozen:</b> ${this.stale}. The secondary-path model may no longer match: identify again.</span>
            ${live ? html`<button class="primary" @click=${() => void this.onIdentify(-30, this.identified ? Math.max(16, this.identified.model.length - this.identified.delaySamples) : 256)}>Identify again</button>` : ''}</div>`
        : ''}

      <div class="layout">
        <aside>
          ${this.renderSource()}
          <ancb-controls .settings=${this.settings} @ancb-settings=${(e: CustomEvent<ControlSettings>) => void this.onSettings(e)} @ancb-reset-weights=${() => this.session.resetWeights()}></ancb-controls>
        </aside>
        <section class="display" aria-label="Measurements">
          <div class="card levels">
            <div class="readouts">
              <div class="readout"><span class="name" id="att-now-l">Attenuation now</span><output id="att-now" aria-labelledby="att-now-l">—</output><span class="unit">dB (125 ms)</span></div>
              <div class="readout"><span class="name" id="att-avg-l">Averaged</span><output id="att-avg" aria-labelledby="att-avg-l">—</output><span class="unit">dB (1 s)</span></div>
            </div>
            <div class="bars">
              <ancb-meter channel="ref" label="Reference mic"></ancb-meter>
              <ancb-meter channel="err" label="Error mic"></ancb-meter>
              <ancb-meter channel="out" label="Output" note="RMS bar, peak marker (1 s hold), red: cap"></ancb-meter>
              <ancb-meter channel="gr" label="Limiter" unit="dB GR" min="0" max="24" note="gain reduction; the cap limits sample peaks, a true peak can read up to about 6 dB higher"></ancb-meter>
              <p class="small muted" id="true-peak"></p>
            </div>
          </div>
          <div class="plots">
            <ancb-plot id="plot-spectrum" heading="Error mic spectrum, control off and on" .config=${SPECTRUM} summary="Welch PSD of the error mic, about 6 Hz resolution"></ancb-plot>
            <ancb-plot id="plot-att" heading="Attenuation over time" .config=${ATTENUATION} summary="Control-off error level over control-on level"></ancb-plot>
            <ancb-plot id="plot-impulse" heading="Secondary-path model: impulse response" .config=${IMPULSE}
              placeholder=${this.modelSource === 'none' ? (live ? 'No model yet: identify the secondary path.' : 'Start the simulation to see the model.') : ''}
              summary=${this.modelSource === 'scenario' ? 'Model from the scenario (dashed: true path)' : this.modelSource === 'identified' ? 'Identified by sweep' : ''}></ancb-plot>
            <ancb-plot id="plot-magnitude" heading="Secondary-path model: magnitude" .config=${MAGNITUDE}
              placeholder=${this.modelSource === 'none' ? 'No model yet.' : ''}></ancb-plot>
            ${this.settings.controller.algorithm === 'tonal'
              ? html`<ancb-plot id="plot-tone" heading="Tracked tone frequency" .config=${TONE}
                  placeholder=${this.toneSummary ? '' : 'Waiting for the tone follower: start the audio and switch control on.'}
                  summary=${this.toneSummary}></ancb-plot>`
              : ''}
            <ancb-tones></ancb-tones>
          </div>
          <ancb-events></ancb-events>
        </section>
      </div>
      <footer class="muted">
        ${this.running
          ? html`${this.session.sampleRate / 1000} kHz · meters via ${this.session.telemetryKind === 'shared' ? 'shared memory' : 'messages (page not cross-origin isolated)'} · `
          : ''}
        Levels in dBFS (AES17: a full-scale sine reads 0 dBFS). Audio never leaves this tab.
      </footer>
      <ancb-cautions></ancb-cautions>
    `;
  }
}

if (!customElements.get('ancb-app')) customElements.define('ancb-app', AncbApp);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-app': AncbApp;
  }
}
