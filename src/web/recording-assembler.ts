/**
 * The page/worker side of a panel recording: collects the frames the recording tap sends (shared ring
 * or posted chunks, src/protocol/record-ring.ts), the meter readings the panel showed, and at Stop builds
 * the recording bundle (src/io/recording-bundle.ts): control-off and control-on ranges from the state
 * channel, the control-off levels the meters showed, the settings in the scenario's vocabulary.
 *
 * Runs off the audio thread (it allocates as the recording grows). No DOM: the panel's worker and the
 * Node tests use it the same way.
 */
import { powerToDbfs } from '../dsp/units.ts';
import type { EngineEvent } from '../engine/events.ts';
import type { PathModel } from '../io/path-model-file.ts';
import { RECORDING_FORMAT, RECORDING_VERSION, STATE_CODE, type BundleContents, type RecordingManifest } from '../io/recording-bundle.ts';
import type { ReplaySettings } from '../plant/replay.ts';
import { RECORD_CHANNELS, type FrameSink } from '../protocol/record-ring.ts';

/** Frames per storage piece (about 10 s at 48 kHz). */
const PIECE = 1 << 19;

export interface RecordingMeta {
  name?: string;
  source: 'live' | 'simulated';
  devices: Record<string, string>;
  settings: ReplaySettings;
  model: PathModel;
  events: EngineEvent[];
  reportHtml: string;
  toolVersion: string;
}

export class RecordingAssembler {
  private readonly pieces: Float32Array[][] = [];
  private fill = PIECE;
  /** Frames received. */
  frames = 0;
  /** Frames the tap dropped (ring full, no free chunk), as last reported. */
  dropped = 0;
  readonly startedAt: string;
  private offRef = 0;
  private offErr = 0;
  private offCount = 0;

  constructor(readonly sampleRate: number, readonly blockSize: number, readonly maxSeconds = 600, startedAt = new Date()) {
    this.startedAt = startedAt.toISOString();
  }

  get durationS(): number {
    return this.frames / this.sampleRate;
  }

  /** A FrameSink for RecordRingReader.drain (and for posted chunks: `push(chunk.data, CHUNK_FRAMES, 0, chunk.frames)`). */
  readonly push: FrameSink = (data, stride, offset, n) => {
    const limit = Math.round(this.maxSeconds * this.sampleRate);
    let from = 0;
    n = Math.min(n, limit - this.frames);
    while (from < n) {
      if (this.fill === PIECE) {
        this.pieces.push(Array.from({ length: RECORD_CHANNELS }, () => new Float32Array(PIECE)));
        this.fill = 0;
      }
      const piece = this.pieces[this.pieces.length - 1]!;
      const k = Math.min(n - from, PIECE - this.fill);
      for (let c = 0; c < RECORD_CHANNELS; c++) piece[c]!.set(data.subarray(c * stride + offset + from, c * stride + offset + from + k), this.fill);
      this.fill += k;
      from += k;
      this.frames += k;
    }
  };

  /**
   * A meter reading the panel showed (mean-square powers, full scale 1) while control was in `state`:
   * the control-off ones are averaged into the manifest's `meters`, the levels the user saw.
   */
  noteMeters(refPower: number, errPower: number, state: number): void {
    if (state !== STATE_CODE.off || !Number.isFinite(refPower) || !Number.isFinite(errPower)) return;
    this.offRef += refPower;
    this.offErr += errPower;
    this.offCount++;
  }

  /** One channel of the whole recording. */
  channel(c: number): Float32Array {
    const out = new Float32Array(this.frames);
    let at = 0;
    for (const p of this.pieces) {
      const k = Math.min(PIECE, this.frames - at);
      out.set(p[c]!.subarray(0, k), at);
      at += k;
    }
    return out;
  }

  /** The bundle's contents (validated when turned into files by `bundleFiles`). */
  finish(meta: RecordingMeta): BundleContents {
    const state = this.channel(3);
    const fs = this.sampleRate;
    const ranges: RecordingManifest['ranges'] = { controlOff: [], controlOn: [] };
    let start = 0;
    for (let i = 1; i <= state.length; i++) {
      if (i < state.length && state[i] === state[start]) continue;
      const code = state[start];
      const r: [number, number] = [start / fs, i / fs];
      if (code === STATE_CODE.off) ranges.controlOff.push(r);
      else if (code === STATE_CODE.on) ranges.controlOn.push(r);
      start = i;
    }
    const lvl = (p: number): number | null => (p > 0 ? Math.min(0, powerToDbfs(p)) : null);
    const manifest: RecordingManifest = {
      format: RECORDING_FORMAT,
      version: RECORDING_VERSION,
      ...(meta.name ? { name: meta.name } : {}),
      source: meta.source,
      sampleRate: fs,
      blockSize: this.blockSize,
      channels: ['reference', 'error', 'output', 'state'],
      devices: meta.devices,
      startedAt: this.startedAt,
      settings: meta.settings,
      ranges,
      ...(this.offCount ? { meters: { controlOff: { referenceDbfs: lvl(this.offRef / this.offCount), errorDbfs: lvl(this.offErr / this.offCount) } } } : {}),
      tool: { name: 'ancbench', version: meta.toolVersion },
    };
    return {
      manifest,
      signals: { reference: this.channel(0), error: this.channel(1), output: this.channel(2), state },
      model: meta.model,
      events: meta.events,
      reportHtml: meta.reportHtml,
    };
  }
}
