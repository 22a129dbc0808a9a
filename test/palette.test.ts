import { describe, expect, it } from 'vitest';
import { GRAPHIC_PAIRS, REPORT, REPORT_GRAPHIC_PAIRS, REPORT_TEXT_PAIRS, TEXT_PAIRS, THEMES } from '../src/palette.ts';

// WCAG 2.1 (W3C Recommendation, 2018), definitions "relative luminance" and "contrast ratio":
// sRGB channel c = v/255; linear = c/12.92 if c ≤ 0.03928 else ((c + 0.055)/1.055)^2.4;
// L = 0.2126·R + 0.7152·G + 0.0722·B; ratio = (L1 + 0.05)/(L2 + 0.05) with L1 the lighter.
// Level AA: 4.5:1 for text (success criterion 1.4.3), 3:1 for graphical objects (1.4.11).
// Written here from the Recommendation's text, independently of the module under test.
function luminance(hex: string): number {
  const m = /^#([0-9a-f]{6})$/i.exec(hex);
  if (!m) throw new Error(`not a #rrggbb colour: ${hex}`);
  const ch = [0, 2, 4].map((i) => parseInt(m[1]!.slice(i, i + 2), 16) / 255).map((c) => (c <= 0.03928 ? c / 12.92 : ((c + 0.055) / 1.055) ** 2.4));
  return 0.2126 * ch[0]! + 0.7152 * ch[1]! + 0.0722 * ch[2]!;
}
function contrast(a: string, b: string): number {
  const [l1, l2] = [luminance(a), luminance(b)].sort((x, y) => y - x);
  return (l1! + 0.05) / (l2! + 0.05);
}

describe('palette', () => {
  describe('with the WCAG 2.1 contrast formula', () => {
    it('should give 21:1 for black on white and 1:1 for a colour on itself', () => {
      // calculated from the definition: (1 + 0.05)/(0 + 0.05) = 21
      expect(contrast('#000000', '#ffffff')).toBeCloseTo(21, 10);
      expect(contrast('#1553b8', '#1553b8')).toBeCloseTo(1, 12);
    });
    it('should put #767676 on white just above 4.5:1', () => {
      // the grey often quoted as the lightest that passes AA on white, 4.54:1 (from memory)
      expect(contrast('#767676', '#ffffff')).toBeCloseTo(4.54, 2);
      expect(contrast('#777777', '#ffffff')).toBeLessThan(4.5);
    });
  });

  for (const name of ['dark', 'light'] as const) {
    describe(`with the ${name} theme`, () => {
      const t = THEMES[name];
      it('should give every text colour at least 4.5:1 on its background (WCAG 2.1 AA, 1.4.3)', () => {
        const low = TEXT_PAIRS.map(([fg, bg]) => ({ pair: `${fg} on ${bg}`, ratio: contrast(t[fg], t[bg]) })).filter((p) => p.ratio < 4.5);
        expect(low).toEqual([]);
      });
      it('should give every meaningful line and bar at least 3:1 (WCAG 2.1 AA, 1.4.11)', () => {
        const low = GRAPHIC_PAIRS.map(([fg, bg]) => ({ pair: `${fg} on ${bg}`, ratio: contrast(t[fg], t[bg]) })).filter((p) => p.ratio < 3);
        expect(low).toEqual([]);
      });
    });
  }

  describe('with the report colours', () => {
    it('should give text at least 4.5:1 and plot lines at least 3:1 on paper', () => {
      const lowText = REPORT_TEXT_PAIRS.map(([fg, bg]) => ({ pair: `${fg} on ${bg}`, ratio: contrast(REPORT[fg], REPORT[bg]) })).filter((p) => p.ratio < 4.5);
      const lowLines = REPORT_GRAPHIC_PAIRS.map(([fg, bg]) => ({ pair: `${fg} on ${bg}`, ratio: contrast(REPORT[fg], REPORT[bg]) })).filter((p) => p.ratio < 3);
      expect(lowText).toEqual([]);
      expect(lowLines).toEqual([]);
    });
  });
});
