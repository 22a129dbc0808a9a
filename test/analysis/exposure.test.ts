import { describe, it, expect } from 'vitest';
import {
  nioshPermissibleHours,
  oshaPermissibleHours,
  permissibleHours,
  noiseDosePercent,
  doseToTwaDba,
} from '../../src/analysis/exposure.ts';
import { expectClose } from '../helpers/tolerance.ts';

describe('exposure', () => {
  it('should give the NIOSH permissible times: 85 dBA 8 h, 88 → 4 h, 91 → 2 h, 94 → 1 h, 100 → 15 min', () => {
    // NIOSH, Criteria for a Recommended Standard: Occupational Noise Exposure, 1998 (DHHS (NIOSH) 98-126), chapter 1:
    // T = 8 / 2^((L − 85)/3) hours (docs/references.md).
    expectClose(nioshPermissibleHours(85), 8, 1e-12, '85 dBA');
    expectClose(nioshPermissibleHours(88), 4, 1e-12, '88 dBA');
    expectClose(nioshPermissibleHours(91), 2, 1e-12, '91 dBA');
    expectClose(nioshPermissibleHours(94), 1, 1e-12, '94 dBA');
    expectClose(nioshPermissibleHours(100) * 60, 15, 1e-9, '100 dBA in minutes');
  });

  it('should give the OSHA permissible times: 90 dBA 8 h, 95 → 4 h, 100 → 2 h', () => {
    // 29 CFR 1910.95, Table G-16 (docs/references.md); 94 dBA → 4.6 h in Table G-16a of
    // Appendix A (from memory).
    expectClose(oshaPermissibleHours(90), 8, 1e-12, '90 dBA');
    expectClose(oshaPermissibleHours(95), 4, 1e-12, '95 dBA');
    expectClose(oshaPermissibleHours(100), 2, 1e-12, '100 dBA');
    expectClose(oshaPermissibleHours(94), 4.6, 0.05, '94 dBA');
    expect(permissibleHours(95, 'osha')).toBe(oshaPermissibleHours(95));
  });

  it('should add a worked mix of exposures into a daily dose', () => {
    // NIOSH 1998: D = 100·Σ C_n/T_n. 4 h at 85 dBA (4/8) + 2 h at 91 dBA (2/2) + 30 min at 94 dBA
    // (0.5/1) = 0.5 + 1 + 0.5 → 200 %; a dose of 200 % equals a TWA of 85 + 3 = 88 dBA (one
    // exchange rate above the criterion; the document's rounded formula 10·log10(2) + 85 = 88.01).
    const mix = [
      { levelDba: 85, hours: 4 },
      { levelDba: 91, hours: 2 },
      { levelDba: 94, hours: 0.5 },
    ];
    expectClose(noiseDosePercent(mix), 200, 1e-9, 'NIOSH dose %');
    expectClose(doseToTwaDba(200), 88, 1e-9, 'NIOSH TWA of 200 %');
    // OSHA on the same mix, with Table G-16a times 16 h (85), 7.0 h (91), 4.6 h (94) (from memory):
    // 100·(4/16 + 2/7.0 + 0.5/4.6) ≈ 64.5 %.
    expectClose(noiseDosePercent(mix, 'osha'), 64.5, 0.3, 'OSHA dose %');
    // OSHA: 100 % ↔ 90 dBA and 200 % ↔ 95 dBA (one 5 dB exchange above; 16.61·log10(2) + 90 = 95.0).
    expectClose(doseToTwaDba(100, 'osha'), 90, 1e-9, 'OSHA TWA of 100 %');
    expectClose(doseToTwaDba(200, 'osha'), 95, 1e-9, 'OSHA TWA of 200 %');
  });

  it('should turn a full day at one level back into that level', () => {
    // Round trip: 8 h at L gives D = 100·8/T(L), whose TWA is L by construction of both criteria.
    for (const L of [80, 85, 92.5, 103]) {
      for (const c of ['niosh', 'osha'] as const) {
        expectClose(doseToTwaDba(noiseDosePercent([{ levelDba: L, hours: 8 }], c), c), L, 1e-9, `${c} at ${L} dBA`);
      }
    }
    expect(noiseDosePercent([])).toBe(0);
  });

  it('should refuse bad levels, durations and criteria', () => {
    expect(() => nioshPermissibleHours(NaN)).toThrow(/levelDba must be a number from 0 to 200 dBA, got NaN/);
    expect(() => noiseDosePercent([{ levelDba: 90, hours: -1 }])).toThrow(/segments\[0\]\.hours.*0 to 8784 hours, got -1/);
    expect(() => permissibleHours(90, 'eu' as 'osha')).toThrow(/criterion must be 'niosh' or 'osha', got eu/);
    expect(() => doseToTwaDba(0)).toThrow(/dosePercent.*above 0 %, got 0/);
  });
});
