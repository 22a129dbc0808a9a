import { describe, expect, it } from 'vitest';
import { diagnose, loadAnywayText } from '../../src/ui/identification-text.ts';
import type { IdentificationResult } from '../../src/analysis/live-analysis.ts';

const result = (snrDb: number | null, feedbackRatioDb: number, warnings: string[]): IdentificationResult => ({
  model: new Float32Array(16),
  delaySamples: 0,
  delayMs: 0,
  snrDb,
  feedbackRatioDb,
  warnings,
  usable: snrDb === null || snrDb >= 10,
  sampleRate: 48000,
});

describe('diagnose', () => {
  it('should not pair "no response" with a feedback note measured against that missing response', () => {
    const d = diagnose(
      result(-3, 8, [
        'no response to the probe: the error mic does not seem to hear the loudspeaker (check …)',
        'the loudspeaker reaches the reference mic strongly (8.0 dB relative to the error mic): expect feedback; move …',
      ]),
    );
    expect(d.kind).toBe('none');
    expect(d.responseFound).toBe(false);
    const all = [d.headline, ...d.ranked].join(' ');
    expect(all).toContain('No response to the probe');
    expect(all).not.toContain('reaches the reference mic strongly');
    expect(loadAnywayText(d)).toContain('unverified');
  });
  it('should rank a low SNR first and keep a real feedback finding after it', () => {
    const d = diagnose(result(6, 2, ['low measurement SNR (6.0 dB): raise …', 'the loudspeaker reaches the reference mic strongly (2.0 dB …)']));
    expect(d.kind).toBe('low-snr');
    expect(d.headline).toContain('SNR too low');
    expect(d.ranked).toHaveLength(1);
    expect(d.ranked[0]).toContain('reaches the reference mic strongly (2.0 dB');
  });
  it('should call a good measurement usable with no notes', () => {
    const d = diagnose(result(32, -20, []));
    expect(d.kind).toBe('ok');
    expect(d.ranked).toEqual([]);
  });
});
