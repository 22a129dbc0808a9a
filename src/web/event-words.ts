/**
 * What each event means, in the words the panel and the embeddable node's `event` listeners show
 * (src/ui/event-text.ts adds the values in plain language). Plain data: the web layer and the panel
 * share it.
 */
import type { EventCause } from '../protocol/messages.ts';

/** Plain-language text for each cause (the panel's event list). */
export const EVENT_TEXT: Record<EventCause, string> = {
  'non-finite': 'NaN or infinite samples (replaced by silence)',
  'weights-unbounded': 'control-filter weights growing without bound',
  'error-rise': 'error level rose above the control-off level',
  'output-at-ceiling': 'output held at the cap',
  'input-clipping': 'microphone input clipping',
  'dead-microphone': 'microphone silent or stuck',
  'limiter-engaged': 'limiter reducing gain',
  'latency-jump': 'audio latency changed',
  'model-mismatch': 'secondary-path model no longer fits',
  resume: 'control resumed',
  'input-missing': 'input disconnected or empty (read as silence)',
  'input-restored': 'input connected again',
  'channel-count': 'microphone delivered fewer channels than needed',
  'device-change': 'audio devices changed',
  underrun: 'audio output underran (overload)',
  'probe-done': 'identification probe finished',
  'controller-switch': 'controller switched with a crossfade',
  'calibration-tone': 'calibration tone',
  'level-check': 'level-cap check finished',
};
