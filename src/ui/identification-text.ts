/**
 * One diagnosis of an identification, for the panel: the notes the analysis raised, resolved so that
 * they do not contradict each other, most important first. Figures measured relative to the error
 * mic's response (the loudspeaker → reference-mic ratio, the round trip, a response running past the
 * window) mean nothing when the error mic heard no response, so they are left out then and the
 * diagnosis says why.
 */
import { MIN_USABLE_SNR_DB, type IdentificationResult } from '../web/index.ts';
import { fmtDb } from './format.ts';

export interface Diagnosis {
  /** 'none': no response at all; 'low-snr': a response, too noisy; 'ok': usable. */
  kind: 'none' | 'low-snr' | 'ok';
  /** One line: what was found. */
  headline: string;
  /** Further findings, most important first (each a sentence that stands alone). */
  ranked: string[];
  /** Whether the response-relative figures (round trip, loudspeaker → ref mic) mean anything. */
  responseFound: boolean;
}

const FEEDBACK_LIMIT_DB = -6;

export function diagnose(r: IdentificationResult): Diagnosis {
  const snr = r.snrDb;
  const none = snr !== null && snr < 0;
  const low = !none && snr !== null && snr < MIN_USABLE_SNR_DB;
  const others = r.warnings.filter((w) => !/^no response to the probe|^low measurement SNR|^the loudspeaker reaches the reference mic/.test(w));
  if (none) {
    return {
      kind: 'none',
      headline:
        'No response to the probe: the error mic did not hear the loudspeaker (check the output device, its volume, and that the error mic is on the chosen channel).',
      ranked: [
        'The round trip and the loudspeaker → reference-mic ratio are measured against that response, so without one they mean nothing and are not shown.',
      ],
      responseFound: false,
    };
  }
  const ranked: string[] = [];
  if (r.feedbackRatioDb > FEEDBACK_LIMIT_DB) {
    ranked.push(
      `The loudspeaker reaches the reference mic strongly (${fmtDb(r.feedbackRatioDb)} dB relative to the error mic): expect acoustic feedback; move the reference mic away from the loudspeaker.`,
    );
  }
  for (const w of others) ranked.push(`${w[0]!.toUpperCase()}${w.slice(1)}.`);
  if (low) {
    return {
      kind: 'low-snr',
      headline: `Measurement SNR too low (${fmtDb(snr!)} dB, at least ${MIN_USABLE_SNR_DB} dB needed): raise the probe level a little, or make the room quieter, and identify again.`,
      ranked,
      responseFound: true,
    };
  }
  return { kind: 'ok', headline: snr === null ? 'Response found (SNR not measured: the tail was too short).' : `Response found, measurement SNR ${fmtDb(snr)} dB.`, ranked, responseFound: true };
}

/** What "Load it anyway" does, said before it is done. */
export function loadAnywayText(d: Diagnosis): string {
  return (
    `${d.headline} If you load this model anyway, control runs against it: it may not reduce the noise and may add some. ` +
    'The output still passes the limiter under the cap, and the guard mutes it if the error level rises. ' +
    'The panel marks the model "unverified" and shows no attenuation figure until a control run has lowered the error level ' +
    'clearly below its control-off level.'
  );
}
