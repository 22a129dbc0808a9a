/**
 * <ancb-app>: the control panel. It owns the audio session (src/web/session.ts) and a display loop
 * (requestAnimationFrame) that reads meter frames, draws the meters on canvas and feeds the plots;
 * Lit renders the structure and re-renders only on state changes (start, stop, settings, events).
 *
 * Opens in simulated-plant mode on the first scenario given (the page passes the demo scenarios);
 * the switch at the top moves to live microphones, behind the hearing-safety cautions. Live, two more
 * cards appear: calibration (dB SPL from the user's own readings, per output device and microphone,
 * kept in localStorage; an SPL cap, the stricter cap applies) and the level-cap check with its
 * saved report. Switching between broadband FxLMS and the tone follower crossfades to the engine's
 * standby controller instead of restarting; other controller changes rebuild it and say why.
 *
 * The path from opening the page to hearing cancellation is one button: Start runs the simulated
 * plant with control on. The control button beside it turns control off and on, and its state is
 * shown separately (a chip: on, off, or what the guard did).
 *
 * Measured and estimated figures look different and say what they rest on: the attenuation readouts
 * are measurements only against a measured control-off level (the simulator's control-off twin, or
 * live the level recorded with control off before control started; display-state.ts), and are left
 * empty with the reason otherwise, or while the model was loaded against the identification's
 * advice and no control run has yet shown that it works.
 */
import '../web/zod-jitless.ts';
import { LitElement, css, html } from 'lit';
import { shared, applyTheme, initialTheme, type ThemeName } from './theme.ts';
import { FrameLoop } from './frame-loop.ts';
import { DisplayState } from './display-state.ts';
import { fmtDb, fmtHz, fmtLevel } from './format.ts';
import { SPECTRUM_UNIT } from '../web/index.ts';
import { diagnose } from './identification-text.ts';
import { broadbandName, rebuildReason } from './controller-text.ts';
import { AncbMeter } from './meter-bar.ts';
import { AncbPlot, type PlotConfig } from './plot.ts';
import { AncbEvents } from './events-list.ts';
import { AncbCautions } from './cautions.ts';
import { defaultStandby } from './controls.ts';
import './sim-source.ts';
import './live-setup.ts';
import './calibration.ts';
import type { AncbLevelCheck } from './level-check.ts';
import { checkDurationS } from './level-check.ts';
import { createOutputCalibration, micCalibrationFromRecording, SINE_CREST_DB, type OutputCalibration } from '../index.ts';
import { effectiveCeiling, type EffectiveCeiling } from '../index.ts';
import { browserCalibrationStore, deviceKey, type StoredMicCalibration, type StoredOutputCalibration } from '../index.ts';
import { buildLevelCheckReport, levelCheckHtml, reportJson, type LiveLevelCheckReport } from '../web/level-check-report.ts';
import type { LevelCheckRequest } from '../web/index.ts';
import type { AncbTones } from './tones.ts';
import './tones.ts';
import './output-limit.ts';
import type { AncbOutputLimit } from './output-limit.ts';
import './recording-panel.ts';
import type { AncbRecording } from './recording-panel.ts';
import type { ScenarioEntry } from './sim-source.ts';
import type { AncbLiveSetup } from './live-setup.ts';
import { LIVE_MAX_QUANTUM, Session, SWITCH_CROSSFADE_MS, checkController, checkedSimScenario, defaultProbe, panelSettingsFromScenario, type ControlSettings, type ModelInfo } from '../web/session.ts';
import { analysis } from '../web/analysis-client.ts';
import { listDevices, loadChoice, reconcileChoice, requestMicrophonePermission, saveChoice, type DeviceChoice, type DeviceLists } from '../web/devices.ts';
import { causalityVerdict, type CausalityVerdict, type GeometryResult, type IdentificationResult } from '../web/index.ts';
import type { PanelEvent } from '../web/index.ts';

const PLOT_INTERVAL_MS = 100;
const SPECTRUM_INTERVAL_MS = 500;

const SPECTRUM: PlotConfig = {
  xLabel: 'frequency (Hz)',
  yLabel: `PSD (${SPECTRUM_UNIT})`,
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
    { label: 'now (125 ms)', colorVar: '--ancb-series-now', unit: 'dB' },
    { label: 'last second', colorVar: '--ancb-series-avg', unit: 'dB', width: 3 },
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

export const DEFAULT_SETTINGS: ControlSettings = {
  controller: { algorithm: 'fxnlms', taps: 64, stepSize: 0.002 },
  ceilingDbfs: -6,
  adaptation: true,
  standby: defaultStandby({ algorithm: 'fxnlms', taps: 64, stepSize: 0.002 }),
};

/** The most sensitive calibrated frequency: its RMS sensitivity bounds the SPL of any output in the calibrated range. */
function maxSensitivity(cal: OutputCalibration): { db: number; hz: number } {
  let best = cal.points[0]!;
  for (const p of cal.points) if (p.sensitivityDbSpl > best.sensitivityDbSpl) best = p;
  return { db: best.sensitivityDbSpl, hz: best.hz };
}

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
    outputCal: { state: true },
    micCal: { state: true },
    tone: { state: true },
    calBusy: { state: true },
    levelRunning: { state: true },
    levelReport: { state: true },
    levelLinks: { state: true },
    runsAs: { state: true },
    refusal: { state: true },
    trust: { state: true },
    oneMicOffer: { state: true },
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
      .chip {
        font-weight: 700;
        border: 2px solid var(--ancb-line-strong);
        border-radius: 999px;
        padding: 0.25rem 0.8rem;
        white-space: nowrap;
      }
      .chip[data-state='on'] {
        border-color: var(--ancb-on);
        background: var(--ancb-on-bg);
      }
      .chip[data-state='muted'],
      .chip[data-state='frozen'] {
        border-color: var(--ancb-warn);
        color: var(--ancb-warn);
      }
      .basis {
        grid-column: 1 / -1;
        margin: 0;
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
        /* the readouts' column keeps to the readouts: the basis text under them wraps instead of widening it */
        grid-template-columns: minmax(14rem, 27rem) 1fr;
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
      .tools {
        display: grid;
        grid-template-columns: repeat(auto-fit, minmax(30rem, 1fr));
        gap: 0.9rem;
        align-items: start;
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
  /** Calibrations of the chosen output device and error microphone (live), or null. */
  declare outputCal: StoredOutputCalibration | null;
  declare micCal: StoredMicCalibration | null;
  /** The calibration tone now playing. */
  declare tone: { hz: number; dbfs: number } | null;
  declare calBusy: '' | 'tone' | 'mic';
  declare levelRunning: boolean;
  declare levelReport: LiveLevelCheckReport | null;
  declare levelLinks: { json: string; html: string } | null;
  /** What runs the controller now, as the audio thread reported it ('' when stopped). */
  declare runsAs: string;
  /** Why the last controller settings were refused (the engine's message), shown in the Controller card. */
  declare refusal: string;
  /** The loaded model's standing (live): measured well, loaded against advice and unverified, or shown to work by control. */
  declare trust: 'good' | 'unverified' | 'shown';
  readonly calibrations = browserCalibrationStore();
  private toneSeen = false;

  readonly display = new DisplayState();
  readonly session: Session;
  private cautionsAccepted = false;
  /** One-mic layout with a controller that needs a reference mic: the banner offers the tone follower. */
  declare oneMicOffer: boolean;
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
    this.status = 'Stopped. Press Start: the simulated plant runs with control on.';
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
    this.outputCal = null;
    this.micCal = null;
    this.tone = null;
    this.calBusy = '';
    this.levelRunning = false;
    this.levelReport = null;
    this.levelLinks = null;
    this.runsAs = '';
    this.refusal = '';
    this.trust = 'good';
    this.oneMicOffer = false;
    this.loadCalibrations();
    applyTheme(this.theme);
    this.session = new Session({
      frame: (f) => {
        this.display.push(f);
        this.$<AncbRecording>('ancb-recording')?.noteFrame(f);
      },
      event: (e) => {
        this.pendingEvents.push(e);
        this.$<AncbRecording>('ancb-recording')?.noteEvent(e);
      },
      model: (m) => void this.showModel(m),
      stale: (reason) => {
        this.stale = reason;
      },
      warning: (w) => {
        this.warnings = [...this.warnings.slice(-3), w];
      },
      implementation: (text) => {
        this.runsAs = text;
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
    const s = panelSettingsFromScenario(e.scenario);
    return { ...s, standby: defaultStandby(s.controller) };
  }

  // ---------------------------------------------------------------- calibration and caps

  private get outputKey(): string {
    return deviceKey(this.choice.outputDeviceId);
  }

  private get outputLabel(): string {
    const id = this.choice.outputDeviceId;
    return (id && this.devices?.outputs.find((d) => d.deviceId === id)?.label) || 'system default output';
  }

  /** The error mic's device and channel as the store keys it. */
  private get micKey(): string {
    const c = this.choice;
    return deviceKey(c.layout === 'stereo' ? c.refDeviceId : c.errDeviceId, c.errChannel);
  }

  private get micLabel(): string {
    const c = this.choice;
    const id = c.layout === 'stereo' ? c.refDeviceId : c.errDeviceId;
    const name = (id && this.devices?.inputs.find((d) => d.deviceId === id)?.label) || 'system default input';
    return `${name}, channel ${c.errChannel + 1}`;
  }

  private loadCalibrations(): void {
    this.outputCal = this.calibrations.output(this.outputKey);
    this.micCal = this.calibrations.mic(this.micKey);
    if (this.calibrations.dropped.length) this.warnings = [...this.warnings, ...this.calibrations.dropped];
  }

  private calCache: { from: StoredOutputCalibration | null; cal: OutputCalibration | null } = { from: null, cal: null };

  /** The output calibration in use: live only (the simulated plant has no loudspeaker to calibrate). */
  private get activeOutputCal(): OutputCalibration | null {
    if (this.source !== 'live' || !this.outputCal) return null;
    // built once per stored entry (the display loop asks every frame)
    if (this.calCache.from !== this.outputCal) this.calCache = { from: this.outputCal, cal: createOutputCalibration(this.outputCal.points) };
    return this.calCache.cal;
  }

  /** The cap that applies: the dBFS cap, or the stricter of it and the SPL cap through the calibration. */
  private get effective(): EffectiveCeiling {
    const cal = this.activeOutputCal;
    const peak = this.outputCal?.peakCeilingDbSpl ?? null;
    return cal && peak !== null ? effectiveCeiling(this.settings.ceilingDbfs, cal, peak) : effectiveCeiling(this.settings.ceilingDbfs);
  }

  /** What the engine runs with: the panel's settings with the cap that applies. */
  private engineSettings(s: ControlSettings = this.settings): ControlSettings {
    if (this.source !== 'live') return s;
    const cal = this.activeOutputCal;
    const peak = this.outputCal?.peakCeilingDbSpl ?? null;
    const eff = cal && peak !== null ? effectiveCeiling(s.ceilingDbfs, cal, peak) : null;
    return eff ? { ...s, ceilingDbfs: eff.ceilingDbfs } : s;
  }

  private get capNote(): string {
    const e = this.effective;
    if (!e.spl) return '';
    return e.limitedBy === 'spl'
      ? `The SPL cap is stricter: ${fmtDb(e.ceilingDbfs, 2)} dBFS applies (${fmtDb(e.spl.peakCeilingDbSpl, 1)} dB SPL peak, highest measured sensitivity).`
      : `The SPL cap (${fmtDb(e.spl.peakCeilingDbSpl, 1)} dB SPL peak = ${fmtDb(e.spl.uncappedDbfs, 2)} dBFS) is looser: this cap applies.`;
  }

  /** Send the cap that applies to a running engine (after a calibration or SPL-cap change). */
  private async applyCap(): Promise<void> {
    if (this.running) await this.session.applySettings(this.engineSettings(), this.monitorGainDb);
  }

  private async onTone(hz: number, dbfs: number): Promise<void> {
    if (this.busy || this.levelRunning) return;
    if (this.controlOn) this.toggleControl();
    try {
      this.session.playTone(hz, dbfs);
      this.tone = { hz, dbfs };
      this.toneSeen = false;
      this.status = `Calibration tone: ${fmtHz(hz)} at ${fmtDb(dbfs, 1)} dBFS. Read the SPL at the ear position and enter it.`;
    } catch (e) {
      this.status = `Could not play the tone: ${(e as Error).message}`;
    }
  }

  private async onToneEnd(measuredDbSpl: number | null): Promise<void> {
    this.calBusy = 'tone';
    try {
      const r = await this.session.stopTone();
      if (measuredDbSpl === null) {
        this.status = 'Calibration tone stopped; no reading saved.';
        return;
      }
      if (!Number.isFinite(r.measuredDbfs)) throw new Error('the tone stopped before it reached a steady level: play it again');
      // the level actually handed to the output (AES17), not the nominal one: they differ where the high-pass acts
      this.outputCal = this.calibrations.addReading(this.outputKey, this.outputLabel, { hz: r.hz, dbfs: r.measuredDbfs, measuredDbSpl });
      this.status = `Reading saved: ${fmtHz(r.hz)}, ${fmtDb(r.measuredDbfs, 2)} dBFS at the output gave ${fmtDb(measuredDbSpl, 1)} dB SPL.`;
      await this.applyCap();
    } catch (e) {
      this.status = `Calibration reading not saved: ${(e as Error).message}`;
    } finally {
      this.tone = null;
      this.calBusy = '';
    }
  }

  private async onCalRemove(hz: number): Promise<void> {
    this.outputCal = this.calibrations.removeReading(this.outputKey, hz);
    await this.applyCap();
  }

  private async onSplCap(peakDbSpl: number | null): Promise<void> {
    try {
      this.outputCal = this.calibrations.setPeakCeiling(this.outputKey, peakDbSpl);
      await this.applyCap();
      const e = this.effective;
      this.status = peakDbSpl === null ? 'SPL cap cleared: the dBFS cap applies alone.' : `Cap now ${fmtDb(e.ceilingDbfs, 2)} dBFS, set by the ${e.limitedBy === 'spl' ? 'SPL' : 'dBFS'} cap.`;
    } catch (e) {
      this.status = `SPL cap not set: ${(e as Error).message}`;
    }
  }

  private async onMicMeasure(d: { knownDbSpl: number; hz: number; validFromHz: number; validToHz: number; seconds: number }): Promise<void> {
    this.calBusy = 'mic';
    this.status = `Recording the error mic for ${d.seconds} s: keep the reference source steady.`;
    try {
      const rec = await this.session.record(d.seconds);
      const cal = micCalibrationFromRecording({ samples: rec.err, knownDbSpl: d.knownDbSpl, hz: d.hz, validFromHz: d.validFromHz, validToHz: d.validToHz });
      this.micCal = this.calibrations.saveMic(this.micKey, { calibration: cal, knownDbSpl: d.knownDbSpl, measuredDbfs: d.knownDbSpl - cal.sensitivityDbSpl, label: this.micLabel });
      this.status = `Error mic calibrated: 0 dBFS = ${fmtDb(cal.sensitivityDbSpl, 2)} dB SPL.`;
    } catch (e) {
      this.status = `Microphone calibration failed: ${(e as Error).message}`;
    } finally {
      this.calBusy = '';
    }
  }

  private async onLevelCheck(signal: LevelCheckRequest['signal']): Promise<void> {
    if (this.busy || this.levelRunning || this.tone) return;
    if (this.controlOn) this.toggleControl();
    const cal = this.activeOutputCal;
    const peak = this.outputCal?.peakCeilingDbSpl ?? null;
    const mic = this.micCal?.calibration;
    const request: LevelCheckRequest = {
      ceilingDbfs: this.settings.ceilingDbfs,
      ...(cal && peak !== null ? { outputCalibration: this.outputCal!.points, peakCeilingDbSpl: peak } : {}),
      ...(mic ? { micCalibration: mic } : {}),
      signal,
    };
    this.levelRunning = true;
    this.status = 'Level-cap check running: the test signals ramp past the cap. Control is off.';
    try {
      const { result, output } = await this.session.levelCheck(request, checkDurationS(signal));
      const rep = buildLevelCheckReport(result, output, {
        outputDevice: this.outputLabel,
        errorMicDevice: this.micLabel,
        sampleRate: this.session.sampleRate,
        finishedAt: new Date().toISOString(),
      });
      const page = await levelCheckHtml(rep, result);
      if (this.levelLinks) {
        URL.revokeObjectURL(this.levelLinks.json);
        URL.revokeObjectURL(this.levelLinks.html);
      }
      this.levelLinks = {
        json: URL.createObjectURL(new Blob([reportJson(rep)], { type: 'application/json' })),
        html: URL.createObjectURL(new Blob([page], { type: 'text/html' })),
      };
      this.levelReport = rep;
      this.status = rep.passed
        ? `Level-cap check passed: largest sample ${fmtDb(rep.maxSamplePeakDbfs, 2)} dBFS against the ${fmtDb(rep.ceilingDbfs, 2)} dBFS cap. Save the report below.`
        : `Level-cap check FAILED: ${rep.reasons.join('; ')}.`;
    } catch (e) {
      this.status = `Level-cap check did not finish: ${(e as Error).message}`;
    } finally {
      this.levelRunning = false;
    }
  }

  private $<T extends Element>(sel: string): T | null {
    return this.renderRoot.querySelector<T>(sel);
  }

  // ---------------------------------------------------------------- display loop

  private tick(nowMs: number): void {
    this.session.poll();
    const d = this.display;
    if (this.pendingEvents.length) {
      // on panel time, like the plots: a restarted plant's clock starts again from zero
      this.$<AncbEvents>('ancb-events')?.add(this.pendingEvents.map((e) => ({ ...e, timeS: e.timeS + d.timeOffsetS })));
      this.pendingEvents = [];
    }
    const live = this.source === 'live';
    const m = (ch: string): AncbMeter | null => this.$<AncbMeter>(`ancb-meter[channel=${ch}]`);
    if (d.frames > 0) {
      m('ref')?.show(live && this.choice.layout === 'err-only' ? NaN : d.refDb, NaN, NaN, nowMs);
      m('err')?.show(d.errDb, NaN, NaN, nowMs);
      m('out')?.show(d.outDb, d.outPeakDb, d.ceilingDb, nowMs);
      m('gr')?.show(d.grDb, NaN, NaN, nowMs);
      this.$<AncbOutputLimit>('ancb-output-limit')?.show(d.outputLimited);
      const gate = this.attenuationGate();
      this.setReadout('att-now', gate.ok ? d.attNowDb : NaN);
      this.setReadout('att-avg', gate.ok ? d.attAvgDb : NaN);
      this.setText('#att-basis', gate.text);
      const basisEl = this.$<HTMLElement>('#att-basis');
      if (basisEl && basisEl.dataset.ok !== String(gate.ok)) basisEl.dataset.ok = String(gate.ok);
      if (this.trust === 'unverified' && d.controlShownToWork) {
        this.trust = 'shown';
        this.status = 'The model loaded against the identification\'s advice works here: control has lowered the error level clearly. Attenuation is now shown as measured.';
      }
      const cal = live ? this.activeOutputCal : null;
      // the cap in dB SPL: peak SPL at the most sensitive calibrated frequency bounds every frequency in the range
      const capSpl = cal ? ` = at most ${fmtDb(d.ceilingDb + maxSensitivity(cal).db + SINE_CREST_DB)} dB SPL peak at the ear (${fmtHz(cal.minHz)} … ${fmtHz(cal.maxHz)})` : '';
      this.setText('#true-peak', `output true peak (max, 4× oversampled): ${fmtLevel(d.maxTruePeakDb)} dBTP · cap ${fmtLevel(d.ceilingDb)} dBFS${capSpl}`);
      if (this.levelRunning) this.$<AncbLevelCheck>('ancb-level-check')?.showProgress(d.probeProgress);
      if (this.tone && this.calBusy === '') {
        // the tone stops by itself after TONE_MAX_S: the mode leaves 'tone' (4) without a stop from here
        if (d.mode === 4) this.toneSeen = true;
        else if (this.toneSeen) {
          this.tone = null;
          this.status = 'The calibration tone stopped by itself (time limit): play it again to take a reading.';
        }
      }
      this.$<AncbTones>('ancb-tones')?.show(d, nowMs);
      if (d.guardState !== this.guardState) {
        const was = this.guardState;
        this.guardState = d.guardState;
        if (this.running) {
          const unverified = this.source === 'live' && this.trust === 'unverified' && this.controlOn ? ' Control runs against an UNVERIFIED model.' : '';
          this.status =
            (d.guardState === 2
              ? 'Guard: the anti-noise output is muted (the cause is in the events). Press Resume to let control start again.'
              : d.guardState === 1
                ? 'Guard: adaptation is frozen; the anti-noise keeps its last weights (the cause is in the events). Press Resume to adapt again.'
                : was > 0 && this.controlOn
                  ? 'Guard released: control is running again.'
                  : this.status) + (d.guardState > 0 || (was > 0 && this.controlOn) ? unverified : '');
        }
      }
      const setup = this.$<AncbLiveSetup>('ancb-live-setup');
      if (setup && this.busy === 'identify') setup.showProgress(d.probeProgress);
    }
    if (nowMs - this.lastPlotMs >= PLOT_INTERVAL_MS && d.histT.length > 1) {
      this.lastPlotMs = nowMs;
      // the history shows what the readouts may show: nothing while no figure is a measurement of control
      const shown = this.source === 'sim' || (this.trust !== 'unverified' && d.attBasis !== 'none');
      this.$<AncbPlot>('#plot-att')?.setData(shown ? [d.histT, d.histNow, d.histAvg] : [d.histT, d.histT.map(() => null), d.histT.map(() => null)]);
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
          const plot = this.$<AncbPlot>('#plot-spectrum');
          plot?.setData([f, nul(s.offDb), nul(s.onDb)]);
          plot?.setLegendNote(0, s.offSeconds > 0 ? null : 'none recorded yet');
          plot?.setLegendNote(1, s.onSeconds > 0 ? null : 'none recorded yet');
          const gate = this.attenuationGate();
          const off = s.offSeconds > 0 ? { frequencyHz: s.frequencyHz, densityDb: s.offDb, resolutionHz: s.resolutionHz } : null;
          const on = s.onSeconds > 0 ? { frequencyHz: s.frequencyHz, densityDb: s.onDb, resolutionHz: s.resolutionHz } : null;
          const basis =
            this.source === 'sim'
              ? 'the error mic in the simulator\'s control-off twin (last 2 s)'
              : `the error mic's spectrum over the last ${Math.min(2, s.offSeconds).toFixed(1)} s with control off`;
          this.$<AncbTones>('ancb-tones')?.setSpectra(off, on, basis, gate.ok || !this.controlOn ? (this.controlOn ? '' : 'control is off') : gate.why);
        })
        .finally(() => {
          this.spectrumPending = false;
        });
    }
  }

  /**
   * Whether the attenuation readouts may show a figure, what it rests on, and why not when they may not.
   * A figure is a measurement against a measured control-off level; none is shown live while the model
   * is unverified (loaded against the identification's advice, and no control run has shown it works).
   */
  private attenuationGate(): { ok: boolean; text: string; why: string } {
    const d = this.display;
    if (!this.running) return { ok: false, text: 'Attenuation: press Start.', why: 'not running' };
    if (!this.controlOn) return { ok: false, text: 'Attenuation: control is off.', why: 'control is off' };
    if (this.source === 'sim') {
      return {
        ok: true,
        text: 'Measured: the error mic against the simulator\'s control-off twin (the same plant, sources and noise with no control, at the same instants).',
        why: '',
      };
    }
    if (d.attBasis === 'none') return { ok: false, text: `Attenuation not shown: ${d.attMissing}.`, why: d.attMissing };
    if (this.trust === 'unverified') {
      const why =
        'the secondary-path model is unverified (identification failed and it was loaded anyway); a level change is not shown as attenuation until control has lowered the error level clearly';
      return { ok: false, text: `Attenuation not shown: ${why}.`, why };
    }
    return {
      ok: true,
      text: `Measured: the error mic against its mean level over ${d.referenceSeconds.toFixed(1)} s with control off, recorded before control started.`,
      why: '',
    };
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
      // only a figure the attenuation gate let through is shown, and it is a measurement
      el.dataset.kind = Number.isFinite(v) ? 'measured' : 'none';
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
        // one press from opening the page to hearing cancellation: the simulated plant starts with control on
        this.session.setControl(true);
        this.running = true;
        this.controlOn = true;
        this.status = `Simulated plant “${e.scenario.name ?? e.id}” running at ${this.session.sampleRate / 1000} kHz with control on: listen as the noise fades. Turn control off to hear it alone.`;
        return;
      } else {
        this.display.reset('live');
        const c = this.settings.controller;
        if (this.choice.layout === 'err-only' && (c.algorithm !== 'tonal' || c.frequencySource !== 'error')) {
          this.oneMicOffer = true;
          throw new Error(
            c.algorithm === 'tonal'
              ? 'one-mic layout: the tone follower must take its tone from the error mic (there is no reference mic). Use the button above'
              : `one-mic layout: broadband ${c.algorithm === 'fxlms' ? 'FxLMS' : 'FxNLMS'} needs a reference mic. Use the tone follower with the tone from the error mic (button above)`,
          );
        }
        this.oneMicOffer = false;
        this.loadCalibrations();
        await this.session.startLive(this.choice, this.engineSettings());
        // access was granted by opening the microphones: list the devices for the pickers
        if (!this.devices) void this.refreshDevices();
        this.status = `Microphones open at ${this.session.sampleRate / 1000} kHz, control off. ${this.identified && this.identified.sampleRate === this.session.sampleRate ? 'Model loaded: turn control on when ready.' : 'Next: identify the secondary path.'}`;
      }
      this.running = true;
      this.controlOn = false;
    } catch (e) {
      this.status = `Could not start: ${(e as Error).message}`;
      await this.session.stop();
      this.running = false;
      this.controlOn = false;
    } finally {
      this.busy = '';
    }
  }

  private async stop(): Promise<void> {
    this.busy = 'stop';
    await this.session.stop();
    this.running = false;
    this.runsAs = '';
    this.controlOn = false;
    this.tone = null;
    this.calBusy = '';
    this.busy = '';
    this.status = 'Stopped.';
  }

  /** The control state as the chip beside the control button shows it. */
  private controlChip(): { state: 'off' | 'on' | 'muted' | 'frozen'; text: string } {
    if (!this.running || !this.controlOn) return { state: 'off', text: 'control off' };
    const unverified = this.source === 'live' && this.trust === 'unverified' ? ', model unverified' : '';
    if (this.guardState === 2) return { state: 'muted', text: `muted by the guard${unverified}` };
    if (this.guardState === 1) return { state: 'frozen', text: `on, adaptation frozen by the guard${unverified}` };
    return { state: 'on', text: `control on${unverified}` };
  }

  private get canControl(): boolean {
    if (!this.running) return false;
    if (this.tone || this.levelRunning) return false;
    if (this.source === 'sim') return true;
    return this.identified !== null && this.identified.sampleRate === this.session.sampleRate && this.busy !== 'identify';
  }

  private toggleControl(): void {
    if (!this.canControl) return;
    this.controlOn = !this.controlOn;
    this.session.setControl(this.controlOn);
    const unverified = this.source === 'live' && this.trust === 'unverified';
    this.status = this.controlOn
      ? unverified
        ? 'Control on against an UNVERIFIED model: the anti-noise fades in; no attenuation is shown until the error level drops clearly.'
        : 'Control on: the anti-noise fades in; watch the attenuation.'
      : 'Control off: the anti-noise fades out.';
  }

  /** One-mic layout: the tone follower, tracking the tone on the error mic. */
  private useOneMicTonal(): void {
    const prev = this.settings.controller;
    const tonal = prev.algorithm === 'tonal' ? prev : this.settings.standby?.algorithm === 'tonal' ? this.settings.standby : { algorithm: 'tonal' as const, harmonics: 1, stepSize: 0.005, frequencySource: 'error' as const };
    const { hz: _hz, ...rest } = tonal as typeof tonal & { hz?: number };
    const controller = { ...rest, frequencySource: 'error' as const };
    this.settings = { ...this.settings, controller, standby: prev.algorithm === 'tonal' ? this.settings.standby : prev };
    this.oneMicOffer = false;
    this.status = 'Tone follower chosen, tracking the tone on the error mic. Press Start.';
  }

  private async setSource(s: 'sim' | 'live'): Promise<void> {
    if (s === this.source) return;
    if (this.running) await this.stop();
    this.source = s;
    this.display.reset(s);
    this.status = s === 'sim' ? 'Stopped. Press Start: the simulated plant runs with control on.' : 'Live microphones: allow access, choose devices, then Start.';
    if (s === 'live' && this.settings.ceilingDbfs > LIVE_START_CAP_DBFS) {
      // start low: a real loudspeaker follows
      this.settings = { ...this.settings, ceilingDbfs: LIVE_START_CAP_DBFS };
      this.status += ` The output cap is set to ${LIVE_START_CAP_DBFS} dBFS for a safe start; raise it slowly.`;
    }
  }

  private async onSettings(e: CustomEvent<ControlSettings>): Promise<void> {
    const next = e.detail;
    const before = this.settings;
    const prev = before.controller;
    this.settings = next;
    this.refusal = '';
    let how: Awaited<ReturnType<Session['applySettings']>>;
    try {
      if (!this.running) this.checkStoppedSettings(next);
      how = await this.session.applySettings(this.engineSettings(next), this.monitorGainDb);
    } catch (err) {
      // refused (e.g. an implementation this platform or block size cannot run): say why, show the
      // settings the engine still runs with; no fallback is chosen behind the user's back
      this.settings = before;
      this.refusal = `Not applied: ${(err as Error).message}`;
      return;
    }
    if (how === 'switched') {
      const to = next.controller.algorithm === 'tonal' ? 'the tone follower' : `broadband ${broadbandName(next.controller)}`;
      const from = prev.algorithm === 'tonal' ? 'the tone follower' : 'broadband control';
      this.status = `Switched from ${from} to ${to} with a ${SWITCH_CROSSFADE_MS} ms crossfade: no restart; it resumes with the weights it had.`;
    } else if (how === 'rebuilt') {
      const why = rebuildReason(prev, next.controller, before.standby);
      if (this.source === 'sim') {
        // the plant restarted (control off): the path to cancellation stays one press, so control goes back on
        const wasOn = this.controlOn;
        this.controlOn = wasOn;
        if (wasOn) this.session.setControl(true);
        this.status = `New controller (${why}): its weights start from zero and the simulated plant restarted${wasOn ? ' with control on' : ''}.`;
      } else {
        this.controlOn = false;
        this.status = `New controller (${why}) with the current model: its weights start from zero and control is off.`;
      }
    }
  }

  /** With nothing running, refuse now what Start would refuse (the same check the session makes). */
  private checkStoppedSettings(s: ControlSettings): void {
    if (this.source === 'sim') {
      const e = this.scenarioEntry;
      if (e) checkedSimScenario(e.scenario, s);
    } else {
      const fs = this.identified?.sampleRate ?? 48000;
      checkController(s.controller, this.identified?.model ?? new Float32Array(1), LIVE_MAX_QUANTUM, fs);
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
    this.loadCalibrations();
    if (this.running && this.source === 'live') this.status = 'Device choice changed: press Stop and Start to use it, then identify again.';
  }

  private async onIdentify(probeDbfs: number, firTaps: number): Promise<void> {
    if (this.busy || this.tone || this.levelRunning) return;
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
    this.trust = r.usable ? 'good' : 'unverified';
    this.display.resetVerification();
    const d = diagnose(r);
    this.verdict = d.responseFound && this.geometry?.primaryDelayMs != null ? causalityVerdict(this.geometry.primaryDelayMs, r.delayMs) : null;
    this.status = r.usable
      ? `Model loaded: round trip ${fmtDb(r.delayMs, 2)} ms. ${d.ranked.length ? 'See the notes under the result. ' : ''}Turn control on to start.`
      : `Model loaded UNVERIFIED: ${d.headline} Control may do nothing or add noise; no attenuation is shown until a control run lowers the error level clearly.`;
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
      .trust=${this.trust}
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

  private renderTools(): unknown {
    const e = this.effective;
    const capText = e.spl
      ? `${fmtDb(e.ceilingDbfs, 2)} dBFS sample peak, the stricter of ${fmtDb(e.dbfsCeiling, 1)} dBFS and ${fmtDb(e.spl.peakCeilingDbSpl, 1)} dB SPL peak`
      : `${fmtDb(e.ceilingDbfs, 2)} dBFS sample peak`;
    const cal = this.activeOutputCal;
    return html`<div class="tools">
      <ancb-calibration
        .open=${this.running && this.busy === '' && !this.levelRunning}
        .sampleRate=${Number.isFinite(this.session.sampleRate) ? this.session.sampleRate : 48000}
        .outputLabel=${this.outputLabel}
        .output=${this.outputCal}
        .capDbfs=${this.settings.ceilingDbfs}
        .effective=${e}
        .tone=${this.tone}
        .busy=${this.calBusy}
        .micLabel=${this.micLabel}
        .mic=${this.micCal}
        @ancb-tone=${(ev: CustomEvent<{ hz: number; dbfs: number }>) => void this.onTone(ev.detail.hz, ev.detail.dbfs)}
        @ancb-tone-save=${(ev: CustomEvent<{ measuredDbSpl: number }>) => void this.onToneEnd(ev.detail.measuredDbSpl)}
        @ancb-tone-stop=${() => void this.onToneEnd(null)}
        @ancb-cal-remove=${(ev: CustomEvent<{ hz: number }>) => void this.onCalRemove(ev.detail.hz)}
        @ancb-spl-cap=${(ev: CustomEvent<{ peakDbSpl: number | null }>) => void this.onSplCap(ev.detail.peakDbSpl)}
        @ancb-mic-measure=${(ev: CustomEvent<{ knownDbSpl: number; hz: number; validFromHz: number; validToHz: number; seconds: number }>) => void this.onMicMeasure(ev.detail)}
        @ancb-mic-clear=${() => {
          this.calibrations.clearMic(this.micKey);
          this.micCal = null;
        }}
      ></ancb-calibration>
      <ancb-level-check
        .open=${this.running && this.busy === '' && !this.tone}
        .running=${this.levelRunning}
        .capText=${capText}
        .capDbfs=${e.ceilingDbfs}
        .defaultToneHz=${cal ? maxSensitivity(cal).hz : 1000}
        .sampleRate=${Number.isFinite(this.session.sampleRate) ? this.session.sampleRate : 48000}
        .report=${this.levelReport}
        .links=${this.levelLinks}
        @ancb-level-check=${(ev: CustomEvent<{ signal: LevelCheckRequest['signal'] }>) => void this.onLevelCheck(ev.detail.signal)}
        @ancb-level-check-cancel=${() => this.session.cancelLevelCheck()}
      ></ancb-level-check>
    </div>`;
  }

  protected override render(): unknown {
    const live = this.source === 'live';
    const canControl = this.canControl;
    const outCal = live ? this.activeOutputCal : null;
    const errSpl = live ? this.micCal : null;
    const controlHint = !this.running ? 'Start first' : live && !canControl ? 'identify the secondary path first' : '';
    const chip = this.controlChip();
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
        <button id="control" ?disabled=${!canControl} @click=${this.toggleControl} title=${controlHint}>${this.controlOn ? 'Turn control off' : 'Turn control on'}</button>
        <span class="chip" id="control-state" data-state=${chip.state} aria-label=${`control state: ${chip.text}`}>${chip.text}</span>
        <span class="status" role="status" aria-live="polite">${this.status}${controlHint && this.running ? html` <span class="muted">(control: ${controlHint})</span>` : ''}</span>
      </div>
      ${live && this.oneMicOffer && this.choice.layout === 'err-only'
        ? html`<div class="card banner" role="alert"><span class="warn"><b>One-mic layout:</b> broadband control needs a reference mic. The tone follower can track the tone on the error mic alone.</span>
            <button id="use-tonal" class="primary" @click=${() => this.useOneMicTonal()}>Use the tone follower (tone from the error mic)</button></div>`
        : ''}
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
          <ancb-controls .settings=${this.settings} .oneMic=${live && this.choice.layout === 'err-only'} .capNote=${live ? this.capNote : ''} .runsAs=${this.running ? this.runsAs : ''} .refusal=${this.refusal}
            @ancb-settings=${(e: CustomEvent<ControlSettings>) => void this.onSettings(e)} @ancb-reset-weights=${() => this.session.resetWeights()}></ancb-controls>
        </aside>
        <section class="display" aria-label="Measurements">
          <div class="card levels">
            <div class="readouts">
              <div class="readout meas"><span class="name" id="att-now-l">Attenuation now <span class="tag">measured</span></span><output id="att-now" aria-labelledby="att-now-l" data-kind="none">—</output><span class="unit">dB, 125 ms time constant</span></div>
              <div class="readout meas"><span class="name" id="att-avg-l">Last second <span class="tag">measured</span></span><output id="att-avg" aria-labelledby="att-avg-l" data-kind="none">—</output><span class="unit">dB, mean over the last 1 s of control</span></div>
              <p class="basis small muted" id="att-basis" data-ok="false">Attenuation: press Start.</p>
            </div>
            <div class="bars">
              <ancb-meter channel="ref" label="Reference mic"></ancb-meter>
              <ancb-meter channel="err" label="Error mic" .splOffsetDb=${errSpl ? errSpl.calibration.sensitivityDbSpl : null}
                .splNote=${errSpl ? `mic calibration, sound within ${fmtHz(errSpl.calibration.validFromHz)} … ${fmtHz(errSpl.calibration.validToHz)}` : ''}></ancb-meter>
              <ancb-meter channel="out" label="Output (anti-noise)" note="RMS bar, peak marker (1 s hold), red: cap" .splOffsetDb=${outCal ? maxSensitivity(outCal).db : null} splPrefix="≤ "
                .splNote=${outCal ? `at the ear, bound from the most sensitive reading (${fmtHz(maxSensitivity(outCal).hz)}); holds for ${fmtHz(outCal.minHz)} … ${fmtHz(outCal.maxHz)}` : ''}></ancb-meter>
              <ancb-output-limit .method=${this.settings.controller.outputConstraint ?? 'rescale'} .capDbfs=${this.settings.ceilingDbfs}
                @ancb-output-constraint=${(e: CustomEvent<'rescale' | 'effort' | 'none'>) => void this.onSettings(new CustomEvent('ancb-settings', { detail: { ...this.settings, controller: { ...this.settings.controller, outputConstraint: e.detail } } }))}></ancb-output-limit>
              <ancb-meter channel="gr" label="Limiter" unit="dB GR" min="0" max="24" note="gain reduction of the limiter that holds the cap (its true peak is measured below)"></ancb-meter>
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
          ${live ? this.renderTools() : ''}
          <ancb-events></ancb-events>
          <ancb-recording .session=${this.session} .settings=${this.settings} ?running=${this.running} source=${this.source}
            @ancb-control=${(e: CustomEvent<boolean>) => { if (this.controlOn !== e.detail) this.toggleControl(); }}
            @ancb-settings=${(e: CustomEvent<ControlSettings>) => void this.onSettings(e)}></ancb-recording>
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
