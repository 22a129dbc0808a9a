/**
 * Microphones and loudspeakers: permission first (device labels stay empty until the page may use
 * a microphone), then enumeration; the user's choice is remembered in localStorage and falls back to
 * the system default when a remembered device has gone.
 *
 * Capture runs with echo cancellation, noise suppression and automatic gain control all off (each
 * would change the acoustic paths the controller models), and the delivered channel count is
 * checked against what the layout needs.
 */

/** How the two microphones arrive. */
export type MicLayout =
  /** One stereo device carrying both mics (channel choice below). */
  | 'stereo'
  /** Two devices, one mic each (their clocks drift: re-identify when the delay moves). */
  | 'two-devices'
  /** The error mic alone (tone follower's one-microphone mode). */
  | 'err-only';

export interface DeviceChoice {
  layout: MicLayout;
  /** Device of the reference mic (stereo: the one device). '' = system default. */
  refDeviceId: string;
  /** Device of the error mic (two-devices and err-only). '' = system default. */
  errDeviceId: string;
  /** Channel index of each mic within its device (0 or 1). */
  refChannel: number;
  errChannel: number;
  /** Output device; '' = system default. */
  outputDeviceId: string;
}

export const DEFAULT_CHOICE: DeviceChoice = {
  layout: 'stereo',
  refDeviceId: '',
  errDeviceId: '',
  refChannel: 0,
  errChannel: 1,
  outputDeviceId: '',
};

const STORAGE_KEY = 'ancbench.devices.v1';

export interface DeviceLists {
  inputs: { deviceId: string; label: string }[];
  outputs: { deviceId: string; label: string }[];
}

export const CAPTURE_FLAGS = { echoCancellation: false, noiseSuppression: false, autoGainControl: false } as const;

/** Ask for microphone access once (the stream is stopped at once); labels become readable afterwards. */
export async function requestMicrophonePermission(): Promise<void> {
  if (!navigator.mediaDevices?.getUserMedia) throw new Error('this browser offers no microphone access (is the page served over https or localhost?)');
  const s = await navigator.mediaDevices.getUserMedia({ audio: { ...CAPTURE_FLAGS } });
  for (const t of s.getTracks()) t.stop();
}

export async function listDevices(): Promise<DeviceLists> {
  const all = await navigator.mediaDevices.enumerateDevices();
  const name = (d: MediaDeviceInfo, i: number, kind: string): string => d.label || `${kind} ${i + 1}`;
  const inputs = all.filter((d) => d.kind === 'audioinput').map((d, i) => ({ deviceId: d.deviceId, label: name(d, i, 'microphone') }));
  const outputs = all.filter((d) => d.kind === 'audiooutput').map((d, i) => ({ deviceId: d.deviceId, label: name(d, i, 'output') }));
  return { inputs, outputs };
}

export function loadChoice(): DeviceChoice {
  try {
    const raw = localStorage.getItem(STORAGE_KEY);
    if (!raw) return { ...DEFAULT_CHOICE };
    const o = JSON.parse(raw) as Partial<DeviceChoice>;
    const layout: MicLayout = o.layout === 'two-devices' || o.layout === 'err-only' ? o.layout : 'stereo';
    const ch = (v: unknown, d: number): number => (v === 0 || v === 1 ? v : d);
    const id = (v: unknown): string => (typeof v === 'string' ? v : '');
    return {
      layout,
      refDeviceId: id(o.refDeviceId),
      errDeviceId: id(o.errDeviceId),
      refChannel: ch(o.refChannel, 0),
      errChannel: ch(o.errChannel, 1),
      outputDeviceId: id(o.outputDeviceId),
    };
  } catch {
    return { ...DEFAULT_CHOICE };
  }
}

export function saveChoice(c: DeviceChoice): void {
  try {
    localStorage.setItem(STORAGE_KEY, JSON.stringify(c));
  } catch {
    // storage may be disabled: the choice then lasts for this page only
  }
}

/** Replace devices that are no longer present by the default; returns what was replaced. */
export function reconcileChoice(c: DeviceChoice, lists: DeviceLists): { choice: DeviceChoice; missing: string[] } {
  const missing: string[] = [];
  const has = (arr: { deviceId: string }[], id: string): boolean => id === '' || arr.some((d) => d.deviceId === id);
  const choice = { ...c };
  if (!has(lists.inputs, c.refDeviceId)) {
    missing.push('reference microphone');
    choice.refDeviceId = '';
  }
  if (!has(lists.inputs, c.errDeviceId)) {
    missing.push('error microphone');
    choice.errDeviceId = '';
  }
  if (!has(lists.outputs, c.outputDeviceId)) {
    missing.push('output');
    choice.outputDeviceId = '';
  }
  return { choice, missing };
}

export interface OpenedInputs {
  /** One stream per device in use (stereo and err-only: one). */
  streams: MediaStream[];
  /** For each mic: index into streams and channel within it. */
  ref: { stream: number; channel: number } | null;
  err: { stream: number; channel: number };
  /** Channel count each stream reported (NaN when the browser does not say). */
  channelCounts: number[];
  /** Problems to show (fewer channels than needed, separate clocks). */
  warnings: string[];
}

function constraints(deviceId: string, channels: number): MediaStreamConstraints {
  return {
    audio: {
      ...CAPTURE_FLAGS,
      channelCount: { ideal: channels },
      ...(deviceId ? { deviceId: { exact: deviceId } } : {}),
    },
  };
}

function channelCountOf(s: MediaStream): number {
  const t = s.getAudioTracks()[0];
  const c = t?.getSettings().channelCount;
  return typeof c === 'number' ? c : NaN;
}

/** Open the microphones a choice names, checking channel counts. */
export async function openInputs(c: DeviceChoice): Promise<OpenedInputs> {
  const warnings: string[] = [];
  if (c.layout === 'stereo') {
    const s = await navigator.mediaDevices.getUserMedia(constraints(c.refDeviceId, 2));
    const n = channelCountOf(s);
    if (n < 2) warnings.push(`the input device delivers ${n} channel(s); the stereo layout needs 2 (reference and error mic). Choose two devices or the one-mic layout`);
    if (c.refChannel === c.errChannel) warnings.push('reference and error mic are set to the same channel');
    return { streams: [s], ref: { stream: 0, channel: c.refChannel }, err: { stream: 0, channel: c.errChannel }, channelCounts: [n], warnings };
  }
  if (c.layout === 'err-only') {
    const s = await navigator.mediaDevices.getUserMedia(constraints(c.errDeviceId, 1));
    const n = channelCountOf(s);
    const ch = Number.isFinite(n) && c.errChannel >= n ? 0 : c.errChannel;
    return { streams: [s], ref: null, err: { stream: 0, channel: ch }, channelCounts: [n], warnings };
  }
  const a = await navigator.mediaDevices.getUserMedia(constraints(c.refDeviceId, 1));
  let b: MediaStream;
  try {
    b = await navigator.mediaDevices.getUserMedia(constraints(c.errDeviceId, 1));
  } catch (e) {
    for (const t of a.getTracks()) t.stop();
    throw e;
  }
  warnings.push('two separate input devices: their clocks drift apart, so the delay between the mics moves over time. Re-identify when the attenuation drops');
  const na = channelCountOf(a);
  const nb = channelCountOf(b);
  return {
    streams: [a, b],
    ref: { stream: 0, channel: Number.isFinite(na) && c.refChannel >= na ? 0 : c.refChannel },
    err: { stream: 1, channel: Number.isFinite(nb) && c.errChannel >= nb ? 0 : c.errChannel },
    channelCounts: [na, nb],
    warnings,
  };
}

export function closeInputs(o: OpenedInputs | null): void {
  if (!o) return;
  for (const s of o.streams) for (const t of s.getTracks()) t.stop();
}
