/**
 * The panel's replay worker: opens a recording bundle (.zip) and replays its control-off stretch with
 * the panel's settings (src/plant/replay.ts), off the page's main thread. Exposed through comlink.
 */
import * as Comlink from 'comlink';
import { controlOffSignals, parseRecordingBundle, unzipBundle, type RecordingManifest } from '../io/recording-bundle.ts';
import { parseReplaySettings, replay } from '../plant/replay.ts';

export interface BundleReplay {
  manifest: RecordingManifest;
  /** The settings the replay ran with (scenario vocabulary). */
  settings: unknown;
  attenuationDb: number | null;
  errorOffDbfs: number | null;
  errorOnDbfs: number | null;
  convergenceS: number | null;
  peakOutputDbfs: number | null;
  diverged: boolean;
  divergenceReasons: string[];
  timeline: { timeS: Float64Array; offDbfs: Float64Array; onDbfs: Float64Array };
  notes: Record<string, string>;
}

export class ReplayWorker {
  /** Check a bundle (throws one message naming the wrong part) and return its manifest. */
  open(zip: Uint8Array): RecordingManifest {
    return parseRecordingBundle(unzipBundle(zip)).manifest;
  }

  /** Replay the bundle with `settings` (the bundle's own when null). */
  replay(zip: Uint8Array, settings: unknown | null): BundleReplay {
    const b = parseRecordingBundle(unzipBundle(zip));
    const s = parseReplaySettings(settings ?? b.manifest.settings);
    const off = controlOffSignals(b);
    const r = replay({ sampleRate: b.manifest.sampleRate, blockSize: b.manifest.blockSize, reference: off.reference, disturbance: off.error, model: b.model.taps, settings: s }, { wienerMaxS: 5 });
    return {
      manifest: b.manifest,
      settings: s,
      attenuationDb: r.attenuationDb,
      errorOffDbfs: r.errorOffDbfs,
      errorOnDbfs: r.errorOnDbfs,
      convergenceS: r.convergenceS,
      peakOutputDbfs: r.peakOutputDbfs,
      diverged: r.diverged,
      divergenceReasons: r.divergenceReasons,
      timeline: { timeS: r.timeline.timeS, offDbfs: r.timeline.offDbfs, onDbfs: r.timeline.onDbfs },
      notes: r.notes,
    };
  }
}

Comlink.expose(new ReplayWorker());
