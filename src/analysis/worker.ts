/**
 * The analysis Web Worker: exposes LiveAnalysis to the page through comlink. Audio chunks reach it
 * on a MessagePort straight from the worklet (attachAudioPort), never through comlink and never
 * through the page's main thread.
 */
import * as Comlink from 'comlink';
import { LiveAnalysis } from './live-analysis.ts';

Comlink.expose(new LiveAnalysis());
