/**
 * <ancb-recording>: record a run as a recording bundle, open a bundle and replay it with the panel's
 * settings, load a sweep's best settings.
 *
 * Record: control off for the control-off stretch (default 5 s, so every recording holds the noise
 * without control), then on, until Stop; the worklet's tap sends reference, error, output and state to
 * the record worker (shared ring, or posted chunks handed back for reuse), which builds the .zip.
 * The element asks the app to switch control with an `ancb-control` event (detail: on) and to apply
 * settings with an `ancb-settings` event (detail: ControlSettings), as the controls do.
 */
import { LitElement, css, html } from 'lit';
import * as Comlink from 'comlink';
import { shared } from './theme.ts';
import { emit } from './emit.ts';
import type { Session, ControlSettings } from '../web/session.ts';
import type { RecordWorker } from '../web/record-worker.ts';
import type { ReplayWorker, BundleReplay } from '../web/replay-worker.ts';
import RecordWorkerCtor from '../web/record-worker.ts?worker';
import ReplayWorkerCtor from '../web/replay-worker.ts?worker';
import { createRecordBuffer } from '../protocol/record-ring.ts';
import type { PanelEvent, WorkletMessage } from '../protocol/messages.ts';
import { EVENT_CAUSES, type EngineEvent } from '../engine/events.ts';
import { M } from '../protocol/messages.ts';
import { createPathModel } from '../io/path-model-file.ts';
import { escapeHtml } from '../io/report-html.ts';
import { recordingSettings, settingsFromSweep } from '../web/recording-settings.ts';
import { STATE_CODE } from '../io/recording-bundle.ts';
import pkg from '../../package.json' with { type: 'json' };

/** Longest recording the panel keeps in memory (s). */
export const RECORD_MAX_S = 600;

function reportPage(title: string, rows: [string, string][]): string {
  return `<!doctype html><html lang="en"><head><meta charset="utf-8"><title>${escapeHtml(title)}</title></head><body><h1>${escapeHtml(title)}</h1><table>${rows.map(([k, v]) => `<tr><td>${escapeHtml(k)}</td><td>${escapeHtml(v)}</td></tr>`).join('')}</table></body></html>`;
}

export class AncbRecording extends LitElement {
  static override properties = {
    session: { attribute: false },
    settings: { attribute: false },
    running: { type: Boolean },
    source: {},
    phase: { state: true },
    note: { state: true },
    offS: { state: true },
    url: { state: true },
    replayed: { state: true },
  };
  static override styles = [
    shared,
    css`
      :host { display: block; }
      .row { display: flex; flex-wrap: wrap; gap: 0.6rem; align-items: center; margin: 0.4rem 0; }
      .drop { border: 2px dashed var(--ancb-line-strong); padding: 0.6rem; border-radius: 6px; }
      .drop.over { border-color: var(--ancb-accent); }
      .figures { font-family: var(--ancb-mono); }
      .estimate { font-style: italic; }
      input[type='number'] { width: 5rem; }
    `,
  ];

  declare session: Session | null;
  declare settings: ControlSettings | null;
  declare running: boolean;
  declare source: 'sim' | 'live';
  declare phase: 'idle' | 'off' | 'on' | 'saving';
  declare note: string;
  declare offS: number;
  declare url: string;
  declare replayed: BundleReplay | null;
  private recorder: Comlink.Remote<RecordWorker> | null = null;
  private replayer: Comlink.Remote<ReplayWorker> | null = null;
  private onTimer: ReturnType<typeof setTimeout> | null = null;
  private stopped: ((m: WorkletMessage) => void) | null = null;
  private bundle: Uint8Array | null = null;
  /** Engine events during the recording, timed from its first meter frame (a frame late at most). */
  private events: EngineEvent[] = [];
  private t0 = NaN;

  constructor() {
    super();
    this.session = null;
    this.settings = null;
    this.running = false;
    this.source = 'sim';
    this.phase = 'idle';
    this.note = '';
    this.offS = 5;
    this.url = '';
    this.replayed = null;
  }

  /** A meter frame the panel showed (call from the display loop's frame handler). */
  noteFrame(f: Float64Array): void {
    if ((this.phase === 'off' || this.phase === 'on') && Number.isNaN(this.t0)) this.t0 = f[M.timeS]!;
    if (this.phase === 'off' || this.phase === 'on') void this.recorder?.noteMeters(f[M.refPower]!, f[M.errPower]!, this.phase === 'off' ? STATE_CODE.off : STATE_CODE.on);
  }

  /** An event the panel received (engine causes only: the bundle's events are the engine's). */
  noteEvent(e: PanelEvent): void {
    if ((this.phase !== 'off' && this.phase !== 'on') || Number.isNaN(this.t0)) return;
    if ((EVENT_CAUSES as readonly string[]).includes(e.cause)) this.events.push({ ...e, cause: e.cause as EngineEvent['cause'], timeS: Math.max(0, e.timeS - this.t0) });
  }

  private async record(): Promise<void> {
    const session = this.session;
    if (!session || !this.running || !this.settings) {
      this.note = 'Start the audio first.';
      return;
    }
    this.recorder ??= Comlink.wrap<RecordWorker>(new RecordWorkerCtor());
    const fs = session.sampleRate;
    const sab = globalThis.crossOriginIsolated ? createRecordBuffer(fs, 4) : null;
    await this.recorder.begin(fs, session.scenario?.blockSize ?? 128, RECORD_MAX_S, sab);
    session.onRecordMessage = (m) => this.onRecordMessage(m);
    this.events = [];
    this.t0 = NaN;
    emit(this, 'ancb-control', false);
    session.post(sab ? { type: 'record-start', sharedBuffer: sab } : { type: 'record-start' });
    this.phase = 'off';
    this.note = `Recording: control off for ${this.offS} s (the noise without control), then on until Stop.`;
    this.onTimer = setTimeout(() => {
      this.phase = 'on';
      emit(this, 'ancb-control', true);
      this.note = 'Recording: control on. Press Stop to finish.';
    }, this.offS * 1000);
  }

  private onRecordMessage(m: WorkletMessage): void {
    if (m.type === 'record-chunk') {
      void this.recorder!.pushChunk(Comlink.transfer(m.data, [m.data.buffer as ArrayBuffer]), m.frames).then((back) => this.session?.post({ type: 'record-chunk-return', data: back }, [back.buffer as ArrayBuffer]));
    } else if (m.type === 'record-stopped') {
      this.stopped?.(m);
    }
  }

  private async stop(): Promise<void> {
    const session = this.session;
    if (!session || !this.recorder || this.phase === 'idle' || this.phase === 'saving') return;
    if (this.onTimer) clearTimeout(this.onTimer);
    this.phase = 'saving';
    const done = new Promise<WorkletMessage>((resolve) => (this.stopped = resolve));
    session.post({ type: 'record-stop' });
    const end = (await Promise.race([done, new Promise<null>((r) => setTimeout(() => r(null), 2000))])) as (WorkletMessage & { dropped?: number }) | null;
    const m = session.lastModel;
    const fs = session.sampleRate;
    const model = createPathModel({ taps: m && m.taps.length > 1 ? m.taps : [0, 1], sampleRate: m?.sampleRate ?? fs, method: m?.source === 'identified' ? 'noise' : m?.source === 'scenario' ? 'simulated' : 'imported', quality: { snrDb: null }, ...(m && m.taps.length > 1 ? {} : { notes: 'no model was loaded' }) });
    const settings = recordingSettings(this.settings!);
    const labels: Record<string, string> = {};
    if (this.source === 'sim') labels.input = labels.output = 'simulated plant';
    else session.inputs?.streams.forEach((s, i) => (labels[`input${i}`] = s.getAudioTracks()[0]?.label ?? ''));
    try {
      const zip = await this.recorder.finish({
        source: this.source === 'sim' ? 'simulated' : 'live',
        devices: labels,
        settings,
        model,
        events: this.events,
        reportHtml: reportPage('ancbench recording', [['started', new Date().toISOString()], ['source', this.source === 'sim' ? 'simulated plant' : 'live microphones'], ['controller', JSON.stringify(settings.controller)], ['frames dropped', String(end?.dropped ?? 'unknown')]]),
        toolVersion: pkg.version,
      });
      this.bundle = zip;
      if (this.url) URL.revokeObjectURL(this.url);
      this.url = URL.createObjectURL(new Blob([zip as BlobPart], { type: 'application/zip' }));
      this.note = `Recorded. Download the bundle, or replay it below.${end?.dropped ? ` ${end.dropped} frames were dropped (the page was too busy).` : ''}`;
    } catch (e) {
      this.note = `The recording could not be saved: ${(e as Error).message}`;
    } finally {
      this.phase = 'idle';
      session.onRecordMessage = null;
    }
  }

  private async open(file: File): Promise<void> {
    this.replayer ??= Comlink.wrap<ReplayWorker>(new ReplayWorkerCtor());
    const bytes = new Uint8Array(await file.arrayBuffer());
    if (file.name.endsWith('.json')) {
      try {
        const { settings, applied } = settingsFromSweep(JSON.parse(new TextDecoder().decode(bytes)), this.settings!);
        emit(this, 'ancb-settings', settings);
        this.note = `Loaded the sweep's best settings: ${Object.entries(applied).map(([k, v]) => `${k} = ${v}`).join(', ')}.`;
      } catch (e) {
        this.note = `Not loaded: ${(e as Error).message}`;
      }
      return;
    }
    try {
      const manifest = await this.replayer.open(bytes);
      this.bundle = bytes;
      this.note = `Opened "${file.name}" (${manifest.source}, ${manifest.sampleRate} Hz). Replay runs its control-off stretch with the panel's settings.`;
      this.replayed = null;
    } catch (e) {
      this.note = `Not a usable recording bundle: ${(e as Error).message}`;
    }
  }

  private async replay(): Promise<void> {
    if (!this.bundle || !this.settings) return;
    this.replayer ??= Comlink.wrap<ReplayWorker>(new ReplayWorkerCtor());
    this.note = 'Replaying…';
    try {
      this.replayed = await this.replayer.replay(this.bundle, recordingSettings(this.settings));
      this.note = '';
    } catch (e) {
      this.note = `Replay refused: ${(e as Error).message}`;
    }
  }

  private onDrop(e: DragEvent): void {
    e.preventDefault();
    (e.currentTarget as HTMLElement).classList.remove('over');
    const f = e.dataTransfer?.files[0];
    if (f) void this.open(f);
  }

  protected override render(): unknown {
    const r = this.replayed;
    const fmt = (v: number | null, unit: string): string => (v === null ? 'n/a' : `${v.toFixed(1)} ${unit}`);
    return html`
      <h2>Record and replay</h2>
      <div class="row">
        <label>Control off first <input type="number" min="1" max="60" step="1" .value=${String(this.offS)}
          @change=${(e: Event) => (this.offS = Math.min(60, Math.max(1, Number((e.target as HTMLInputElement).value) || 5)))}> s</label>
        <button id="record" ?disabled=${!this.running || this.phase !== 'idle'} @click=${() => void this.record()}>Record</button>
        <button id="record-stop" ?disabled=${this.phase !== 'off' && this.phase !== 'on'} @click=${() => void this.stop()}>Stop recording</button>
        ${this.url ? html`<a id="record-download" href=${this.url} download="ancbench-recording.zip">Download bundle</a>` : ''}
      </div>
      <div class="drop row" @dragover=${(e: DragEvent) => { e.preventDefault(); (e.currentTarget as HTMLElement).classList.add('over'); }}
        @dragleave=${(e: DragEvent) => (e.currentTarget as HTMLElement).classList.remove('over')} @drop=${(e: DragEvent) => this.onDrop(e)}>
        <label>Open a recording (.zip) or a sweep result (.json): <input id="record-open" type="file" accept=".zip,.json"
          @change=${(e: Event) => { const f = (e.target as HTMLInputElement).files?.[0]; if (f) void this.open(f); }}></label>
        <button id="record-replay" ?disabled=${!this.bundle} @click=${() => void this.replay()}>Replay with these settings</button>
      </div>
      <p class="muted" role="status">${this.note}</p>
      ${r ? html`<p class="figures estimate">Replay (an estimate: recorded noise, modelled path, no feedback): control off ${fmt(r.errorOffDbfs, 'dBFS')} → on ${fmt(r.errorOnDbfs, 'dBFS')},
        attenuation ${fmt(r.attenuationDb, 'dB')}${r.diverged ? ` — diverged: ${r.divergenceReasons.join('; ')}` : ''}</p>` : ''}
    `;
  }
}

if (!customElements.get('ancb-recording')) customElements.define('ancb-recording', AncbRecording);
