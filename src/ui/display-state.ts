/**
 * Turns meter frames into what the panel shows: levels in dBFS (AES17 RMS, powerToDbfs), the output
 * peak held for a second against its cap, attenuation now and averaged, and the histories the plots
 * draw. Levels are smoothed on power with the IEC 61672-1 "F" time constant (125 ms, from memory),
 * so a steady tone reads steady; attenuation uses the engine's own F/S-like averages live, and in
 * the simulated plant the control-off twin the simulator computes alongside.
 */
import { M, MAX_PANEL_HARMONICS, harmonicIndex } from '../web/index.ts';
import { powerToDbfs } from '../index.ts';

export const FAST_S = 0.125;
export const SLOW_S = 1;
/** Seconds of history kept for the time plots. */
export const HISTORY_S = 60;
export const PEAK_HOLD_S = 1;

export class DisplayState {
  kind: 'sim' | 'live' = 'sim';
  refDb = NaN;
  errDb = NaN;
  outDb = NaN;
  outPeakDb = NaN;
  ceilingDb = NaN;
  grDb = 0;
  attNowDb = NaN;
  attAvgDb = NaN;
  mode = 0;
  adapting = 1;
  rampGain = 0;
  probeProgress = NaN;
  toneHz = NaN;
  toneLocked = NaN;
  inputChannels = NaN;
  guardState = 0;
  outputLimited = 0;
  maxTruePeakDb = NaN;
  /** Largest step between consecutive output samples in the last frame (linear, full scale 1): the click meter. */
  outMaxStep = NaN;
  /** 1 while the engine crossfades between controllers. */
  switching = 0;
  /** Tone follower, per harmonic (index k − 1): frequency, before/after levels in dBFS (AES17), phase, attenuation. */
  toneHarmonics = 0;
  readonly hHz = new Float64Array(MAX_PANEL_HARMONICS);
  readonly hBeforeDb = new Float64Array(MAX_PANEL_HARMONICS);
  readonly hAfterDb = new Float64Array(MAX_PANEL_HARMONICS);
  readonly hPhaseDeg = new Float64Array(MAX_PANEL_HARMONICS);
  readonly hAttDb = new Float64Array(MAX_PANEL_HARMONICS);
  timeS = 0;
  frames = 0;
  readonly histT: number[] = [];
  readonly histNow: (number | null)[] = [];
  readonly histAvg: (number | null)[] = [];
  /** Per frame, aligned with histT: the click meter and the output sample peak (linear). */
  readonly histStep: number[] = [];
  readonly histOutPeak: number[] = [];
  readonly toneT: number[] = [];
  readonly toneF: (number | null)[] = [];
  private refP = NaN;
  private errP = NaN;
  private outP = NaN;
  private onFast = NaN;
  private onSlow = NaN;
  private offFast = NaN;
  private offSlow = NaN;
  private peakHold = 0;
  private peakAt = -Infinity;
  private lastT = NaN;

  reset(kind: 'sim' | 'live'): void {
    const fresh = new DisplayState();
    for (const key of Object.keys(fresh) as (keyof DisplayState)[]) {
      const v = fresh[key];
      if (typeof v === 'number' || typeof v === 'string') (this as Record<string, unknown>)[key] = v;
    }
    this.kind = kind;
    for (const a of [this.histT, this.histNow, this.histAvg, this.histStep, this.histOutPeak, this.toneT, this.toneF]) a.length = 0;
    for (const a of [this.hHz, this.hBeforeDb, this.hAfterDb, this.hPhaseDeg, this.hAttDb]) a.fill(NaN);
  }

  push(f: Float64Array): void {
    const t = f[M.timeS]!;
    const dt = Number.isFinite(this.lastT) && t > this.lastT ? t - this.lastT : 1 / 30;
    this.lastT = t;
    const aF = 1 - Math.exp(-dt / FAST_S);
    const aS = 1 - Math.exp(-dt / SLOW_S);
    const smooth = (prev: number, x: number, a: number): number => (Number.isFinite(prev) && Number.isFinite(x) ? prev + a * (x - prev) : x);
    this.refP = smooth(this.refP, f[M.refPower]!, aF);
    this.errP = smooth(this.errP, f[M.errPower]!, aF);
    this.outP = smooth(this.outP, f[M.outPower]!, aF);
    this.refDb = powerToDbfs(this.refP);
    this.errDb = powerToDbfs(this.errP);
    this.outDb = powerToDbfs(this.outP);
    const pk = f[M.outPeak]!;
    if (pk >= this.peakHold || t - this.peakAt > PEAK_HOLD_S) {
      this.peakHold = pk;
      this.peakAt = t;
    }
    this.outPeakDb = 20 * Math.log10(this.peakHold);
    this.ceilingDb = f[M.ceilingDbfs]!;
    this.grDb = f[M.limiterGainReductionDb]!;
    this.mode = f[M.mode]!;
    this.adapting = f[M.adapting]!;
    this.rampGain = f[M.rampGain]!;
    this.probeProgress = f[M.probeProgress]!;
    this.toneHz = f[M.toneHz]!;
    this.toneLocked = f[M.toneLocked]!;
    this.inputChannels = f[M.inputChannels]!;
    this.guardState = f[M.guardState]!;
    this.outputLimited = f[M.outputLimited]!;
    this.maxTruePeakDb = 20 * Math.log10(f[M.maxTruePeak]!);
    this.outMaxStep = f[M.outMaxStep]!;
    this.switching = f[M.switching]!;
    const th = f[M.toneHarmonics]!;
    this.toneHarmonics = Number.isFinite(th) ? th : 0;
    for (let k = 1; k <= MAX_PANEL_HARMONICS; k++) {
      // a sine of peak amplitude A reads 20·log10(A) dBFS by AES17 (full-scale sine = 0 dBFS)
      this.hHz[k - 1] = f[harmonicIndex(k, 0)]!;
      this.hBeforeDb[k - 1] = 20 * Math.log10(f[harmonicIndex(k, 1)]!);
      this.hAfterDb[k - 1] = 20 * Math.log10(f[harmonicIndex(k, 2)]!);
      this.hPhaseDeg[k - 1] = f[harmonicIndex(k, 3)]!;
      this.hAttDb[k - 1] = f[harmonicIndex(k, 4)]!;
    }
    this.timeS = t;
    this.frames++;

    const controlling = this.mode === 1;
    if (this.kind === 'sim') {
      // the simulator's control-off twin: same sources, same noise, no controller
      const on = f[M.errPower]!;
      const off = f[M.errOffPower]!;
      this.onFast = smooth(this.onFast, on, aF);
      this.onSlow = smooth(this.onSlow, on, aS);
      this.offFast = smooth(this.offFast, off, aF);
      this.offSlow = smooth(this.offSlow, off, aS);
      this.attNowDb = controlling ? 10 * Math.log10(this.offFast / this.onFast) : NaN;
      this.attAvgDb = controlling ? 10 * Math.log10(this.offSlow / this.onSlow) : NaN;
    } else {
      this.attNowDb = controlling ? f[M.attenuationDb]! : NaN;
      this.attAvgDb = controlling ? f[M.attenuationSlowDb]! : NaN;
    }
    const keep = (v: number): number | null => (Number.isFinite(v) ? v : null);
    this.histT.push(t);
    this.histNow.push(keep(this.attNowDb));
    this.histAvg.push(keep(this.attAvgDb));
    this.histStep.push(this.outMaxStep);
    this.histOutPeak.push(pk);
    while (this.histT.length > 2 && t - this.histT[0]! > HISTORY_S) {
      this.histT.shift();
      this.histNow.shift();
      this.histAvg.shift();
      this.histStep.shift();
      this.histOutPeak.shift();
    }
    if (Number.isFinite(this.toneHz) || this.toneT.length > 0) {
      this.toneT.push(t);
      this.toneF.push(keep(this.toneHz));
      while (this.toneT.length > 2 && t - this.toneT[0]! > HISTORY_S) {
        this.toneT.shift();
        this.toneF.shift();
      }
    }
  }
}
