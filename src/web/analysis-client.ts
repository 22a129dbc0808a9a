/**
 * The page's handle on the analysis worker (src/analysis/worker.ts) through comlink. One worker per
 * page, created on first use.
 */
import * as Comlink from 'comlink';
import AnalysisWorker from '../analysis/worker.ts?worker';
import type { LiveAnalysis } from '../analysis/live-analysis.ts';

export type AnalysisApi = Comlink.Remote<LiveAnalysis>;

let api: AnalysisApi | null = null;

export function analysis(): AnalysisApi {
  if (!api) api = Comlink.wrap<LiveAnalysis>(new AnalysisWorker());
  return api;
}

/**
 * Give the analysis worker a port on which a worklet will send audio chunks; returns the other end,
 * to be transferred to the worklet.
 */
export async function connectAudioToAnalysis(): Promise<MessagePort> {
  const ch = new MessageChannel();
  await analysis().attachAudioPort(Comlink.transfer(ch.port1, [ch.port1]));
  return ch.port2;
}
