/**
 * Turns meter frames into what the panel shows: levels in dBFS (AES17 RMS, powerToDbfs), the output
 * peak held for a second against its cap, attenuation now and over the last second, and the
 * histories the plots draw. Levels are smoothed on power with a 125 ms exponential time constant
 * (the "F" time weighting of IEC 61672-1:2013, from memory), so a steady tone reads steady.
 *
 * Attenuation is a measurement only against a measured control-off level:
 *  - simulated plant: the simulator's control-off twin (same sources, same noise, no controller), at
 *    the same instants (basis 'twin');
 *  - live: the mean error-mic power over the last control-off stretch (up to REFERENCE_MAX_S of
 *    frames with control off and the output silent, at least REFERENCE_MIN_S) before control
 *    started (basis 'reference'). Without one, no attenuation is computed and `attMissing` says why.
 * "Now" is 10·log10 of the control-off over the control-on power, each smoothed with the 125 ms time
 * constant; "last second" is the same ratio of plain means over the last LAST_SECOND_S of control.
 *
 * Times are panel time: when a restarted plant's clock starts again from zero, its times are moved
 * on past the previous run's (`timeOffsetS`), so histories and events stay in time order.
 */
import { M, MAX_PANEL_HARMONICS, harmonicIndex } from '../web/index.ts';
import { powerToDbfs } from '../index.ts';

export const FAST_S = 0.125;
/** Window of the "last second" attenuation, s (a plain mean of the powers, not an exponential average). */
export const LAST_SECOND_S = 1;
/** Live control-off reference: at least this many seconds of control-off frames, and at most the last … */
export const REFERENCE_MIN_S = 1;
export const REFERENCE_MAX_S = 5;
/**
 * When an unverified model (loaded against the identification's advice) counts as shown to work: the
 * last-second attenuation stays at or above VERIFY_DB for VERIFY_S of control. Our threshold: a level
 * drop that large and that long does not come from a steady noise's own fluctuation.
 */
export const VERIFY_DB = 6;
export const VERIFY_S = 3;
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
  /** What the attenuation figures rest on ('none': not computed, see attMissing). */
  attBasis: 'twin' | 'reference' | 'none' = 'none';
  /** Why there is no attenuation figure ('' when there is one, or control is off). */
  attMissing = '';
  /** Live: seconds of control-off level behind the reference, and when that stretch ended (panel time). */
  referenceSeconds = 0;
  referenceEndS = NaN;
  /** Seconds control has been on without a break. */
  controlSeconds = 0;
  /** Seconds the last-second attenuation has stayed ≥ VERIFY_DB; `controlShownToWork` once it reached VERIFY_S. */
  goodSeconds = 0;
  controlShownToWork = false;
  /** Added to the engine's clock so that panel time never runs backwards across a restart. */
  timeOffsetS = 0;
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
  private offFast = NaN;
  private peakHold = 0;
  private peakAt = -Infinity;
  private lastT = NaN;
  private lastRawT = NaN;
  /** Control frames of the last LAST_SECOND_S: time, duration, on power, control-off power (twin or reference). */
  private readonly win: { t: number; dt: number; on: number; off: number }[] = [];
  /** Control-off frames of the last REFERENCE_MAX_S (live). */
  private readonly offWin: { t: number; dt: number; p: number }[] = [];
  private wasControlling = false;

  reset(kind: 'sim' | 'live'): void {
    const fresh = new DisplayState();
    for (const key of Object.keys(fresh) as (keyof DisplayState)[]) {
      const v = fresh[key];
      if (typeof v === 'number' || typeof v === 'string') (this as Record<string, unknown>)[key] = v;
    }
    this.kind = kind;
    this.win.length = 0;
    this.offWin.length = 0;
    for (const a of [this.histT, this.histNow, this.histAvg, this.histStep, this.histOutPeak, this.toneT, this.toneF]) a.length = 0;
    for (const a of [this.hHz, this.hBeforeDb, this.hAfterDb, this.hPhaseDeg, this.hAttDb]) a.fill(NaN);
  }

  /** Forget whether control was shown to work (a new model was loaded). */
  resetVerification(): void {
    this.goodSeconds = 0;
    this.controlShownToWork = false;
  }

  push(f: Float64Array): void {
    const raw = f[M.timeS]!;
    if (Number.isFinite(this.lastRawT) && raw < this.lastRawT - 1e-6) {
      // a new engine (the plant restarted): its clock starts again
      this.timeOffsetS = this.lastT + 1 / 30 - raw;
    }
    this.lastRawT = raw;
    const t = raw + this.timeOffsetS;
    const dt = Number.isFinite(this.lastT) && t > this.lastT ? t - this.lastT : 1 / 30;
    this.lastT = t;
    const aF = 1 - Math.exp(-dt / FAST_S);
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

    this.attenuation(f, t, dt, aF, smooth);
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

  private attenuation(f: Float64Array, t: number, dt: number, aF: number, smooth: (prev: number, x: number, a: number) => number): void {
    const controlling = this.mode === 1;
    const on = f[M.errPower]!;
    if (controlling && !this.wasControlling) {
      this.onFast = NaN;
      this.offFast = NaN;
      this.win.length = 0;
      this.controlSeconds = 0;
      this.goodSeconds = 0;
    }
    this.wasControlling = controlling;
    let off = NaN;
    if (this.kind === 'sim') {
      // the simulator's control-off twin: same sources, same noise, no controller
      off = f[M.errOffPower]!;
      this.attBasis = 'twin';
      this.attMissing = '';
    } else {
      if (!controlling && this.mode === 0 && this.rampGain === 0 && this.inputChannels > 0 && Number.isFinite(on)) {
        this.offWin.push({ t, dt, p: on });
        while (this.offWin.length > 1 && t - this.offWin[0]!.t > REFERENCE_MAX_S) this.offWin.shift();
      }
      let sum = 0;
      let secs = 0;
      for (const w of this.offWin) {
        sum += w.p * w.dt;
        secs += w.dt;
      }
      this.referenceSeconds = secs;
      this.referenceEndS = this.offWin.length ? this.offWin[this.offWin.length - 1]!.t : NaN;
      if (secs >= REFERENCE_MIN_S) {
        off = sum / secs;
        this.attBasis = 'reference';
        this.attMissing = '';
      } else {
        this.attBasis = 'none';
        this.attMissing =
          secs === 0
            ? 'no control-off level was measured before control started: switch control off for a few seconds'
            : `only ${secs.toFixed(1)} s of control-off level before control started (at least ${REFERENCE_MIN_S} s needed): switch control off for a few seconds`;
      }
    }
    if (!controlling || !Number.isFinite(off)) {
      this.attNowDb = NaN;
      this.attAvgDb = NaN;
      return;
    }
    this.controlSeconds += dt;
    this.onFast = smooth(this.onFast, on, aF);
    this.offFast = smooth(this.offFast, off, aF);
    this.attNowDb = 10 * Math.log10(this.offFast / this.onFast);
    this.win.push({ t, dt, on, off });
    while (this.win.length > 1 && t - this.win[0]!.t >= LAST_SECOND_S) this.win.shift();
    let sOn = 0;
    let sOff = 0;
    let secs = 0;
    for (const w of this.win) {
      sOn += w.on * w.dt;
      sOff += w.off * w.dt;
      secs += w.dt;
    }
    // a full second of control behind the figure, or none
    this.attAvgDb = this.controlSeconds >= LAST_SECOND_S - 1e-9 && secs > 0 ? 10 * Math.log10(sOff / sOn) : NaN;
    if (this.attAvgDb >= VERIFY_DB) {
      this.goodSeconds += dt;
      if (this.goodSeconds >= VERIFY_S) this.controlShownToWork = true;
    } else {
      this.goodSeconds = 0;
    }
  }
}
