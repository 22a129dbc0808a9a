/**
 * The panel's words for events: what happened (EVENT_TEXT), the values in plain language with their
 * units (`eventDetails`), and the order the list shows them in (`orderEvents`: newest first, by time).
 * Raw value names ("riseDb", "baselinePower") never reach the page: each cause has a sentence.
 */
import { NON_FINITE_SOURCES, powerToDbfs, type PanelEvent } from '../web/index.ts';
import { fmtDb, fmtHz, fmtLevel, fmtMs, fmtNumber } from './format.ts';
import { EVENT_TEXT } from '../web/index.ts';

export { EVENT_TEXT };


/** What each guard action does, in words. */
export const ACTION_TEXT: Record<PanelEvent['action'], string> = {
  none: '',
  'freeze-adaptation': 'adaptation frozen',
  'reset-weights': 'weights reset',
  mute: 'output muted',
};

const MIC = ['reference mic', 'error mic'];
const SOURCE_TEXT: Record<(typeof NON_FINITE_SOURCES)[number], string> = {
  ref: 'reference mic',
  err: 'error mic',
  out: 'anti-noise output',
  weights: 'control-filter weights',
};

const ok = (v: number | undefined): v is number => v !== undefined && Number.isFinite(v);
const db = (v: number): string => `${fmtDb(v)} dB`;
const count = (v: number, one: string, many = `${one}s`): string => `${fmtNumber(v, 0)} ${v === 1 ? one : many}`;

/** The event's values as a readable phrase with units ('' when it carries none worth showing). */
export function eventDetails(e: PanelEvent): string {
  const v = e.values;
  const parts: string[] = [];
  const add = (cond: boolean, text: () => string): void => {
    if (cond) parts.push(text());
  };
  switch (e.cause) {
    case 'non-finite': {
      const src = ok(v.source) ? NON_FINITE_SOURCES[v.source] : undefined;
      add(src !== undefined, () => `in the ${SOURCE_TEXT[src!]}`);
      add(ok(v.count) && src !== 'weights', () => count(v.count!, 'sample'));
      break;
    }
    case 'weights-unbounded':
      add(ok(v.weightNormSq) && ok(v.maxNormSq), () => `weight norm² ${fmtNumber(v.weightNormSq!, 2)}, limit ${fmtNumber(v.maxNormSq!, 2)}`);
      add(ok(v.growth), () => `grew ${fmtNumber(v.growth!, 2)}× over one check window`);
      break;
    case 'error-rise':
      add(ok(v.riseDb), () => `${db(v.riseDb!)} above the control-off level`);
      add(ok(v.thresholdDb), () => `threshold ${db(v.thresholdDb!)}`);
      add(ok(v.heldMs), () => `for ${fmtMs(v.heldMs!, 0)}`);
      add(ok(v.baselinePower) && v.baselinePower! > 0, () => `control-off level ${fmtLevel(powerToDbfs(v.baselinePower!))} dBFS`);
      break;
    case 'output-at-ceiling':
    case 'limiter-engaged':
      add(ok(v.gainReductionDb), () => `gain reduction ${db(v.gainReductionDb!)}`);
      add(ok(v.thresholdDb), () => `threshold ${db(v.thresholdDb!)}`);
      add(ok(v.heldMs), () => `for ${fmtMs(v.heldMs!, 0)}`);
      break;
    case 'input-clipping':
      add(ok(v.channel), () => MIC[v.channel!] ?? `channel ${v.channel! + 1}`);
      add(ok(v.runLength), () => `${count(v.runLength!, 'sample')} in a row`);
      add(ok(v.level) && v.level! > 0, () => `at ${fmtLevel(20 * Math.log10(v.level!), 2)} dBFS sample peak`);
      break;
    case 'dead-microphone':
      add(ok(v.channel), () => MIC[v.channel!] ?? `channel ${v.channel! + 1}`);
      add(ok(v.value), () => (v.value === 0 ? 'digital silence' : `stuck at ${fmtNumber(v.value!, 4)}`));
      add(ok(v.heldMs), () => `for ${fmtMs(v.heldMs!, 0)}`);
      break;
    case 'latency-jump':
      add(ok(v.previousMs) && ok(v.currentMs), () => `from ${fmtMs(v.previousMs!)} to ${fmtMs(v.currentMs!)}`);
      break;
    case 'model-mismatch':
      add(ok(v.misfitDb), () => `model error ${db(v.misfitDb!)} relative to the measured response`);
      break;
    case 'resume':
      add(ok(v.byUser), () => (v.byUser === 1 ? 'by the user' : 'automatically after the hold-off'));
      add(ok(v.heldMs), () => `after ${fmtMs(v.heldMs!, 0)}`);
      break;
    case 'input-missing':
      break;
    case 'input-restored':
      add(ok(v.channels), () => count(v.channels!, 'channel'));
      break;
    case 'channel-count':
      add(ok(v.expected) && ok(v.received), () => `${count(v.received!, 'channel')} received, ${fmtNumber(v.expected!, 0)} needed`);
      break;
    case 'device-change':
      break;
    case 'underrun':
      add(ok(v.events), () => count(v.events!, 'new underrun'));
      add(ok(v.durationMs), () => `${fmtMs(v.durationMs!)} in total`);
      break;
    case 'probe-done':
      add(ok(v.samples), () => count(v.samples!, 'sample') + ' recorded');
      add(ok(v.peakDbfs), () => `probe peak ${fmtLevel(v.peakDbfs!)} dBFS`);
      break;
    case 'controller-switch':
      add(ok(v.toTonal), () => (v.toTonal === 1 ? 'to the tone follower' : 'to broadband control'));
      add(ok(v.crossfadeMs), () => `${fmtMs(v.crossfadeMs!, 0)} crossfade`);
      break;
    case 'calibration-tone':
      add(ok(v.hz), () => fmtHz(v.hz!));
      add(ok(v.dbfs), () => `${fmtLevel(v.dbfs!)} dBFS`);
      break;
    case 'level-check':
      add(ok(v.passed), () => (v.passed === 1 ? 'passed' : 'FAILED'));
      add(ok(v.maxSamplePeakDbfs), () => `largest sample ${fmtLevel(v.maxSamplePeakDbfs!, 2)} dBFS`);
      add(ok(v.ceilingDbfs), () => `cap ${fmtLevel(v.ceilingDbfs!, 2)} dBFS`);
      break;
  }
  return parts.join(', ');
}

/**
 * Events in the order the list shows them: newest first by time, events of equal time in the order
 * they arrived (the later one first). Does not modify `events`.
 */
export function orderEvents(events: readonly PanelEvent[]): PanelEvent[] {
  return events
    .map((e, i) => ({ e, i }))
    .sort((a, b) => b.e.timeS - a.e.timeS || b.i - a.i)
    .map((x) => x.e);
}
