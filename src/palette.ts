/**
 * The project's colours, in one place: the panel's two themes (applied as CSS custom properties
 * `--ancb-<name>` by src/ui/theme.ts) and the HTML reports (src/io/report-html.ts,
 * src/io/limits-report-html.ts). The values are ancbench's own, chosen for a projector across a
 * room: strong contrast, series that differ in lightness as well as hue.
 *
 * Contrast is checked by test/palette.test.ts against WCAG 2.1 (success criterion 1.4.3, level AA):
 * every pair in TEXT_PAIRS (text colour on the background it is drawn on) reaches 4.5:1, and every
 * pair in GRAPHIC_PAIRS (plot lines, meter bars, borders that carry meaning) reaches 3:1 (1.4.11).
 * Change a colour here, run that test, and the whole project follows. Plain data: no imports, so
 * every layer may read it.
 */

export type ThemeName = 'dark' | 'light';

/** Every theme variable: name → colour (the CSS custom property is `--ancb-<name>`). */
export interface ThemeColors {
  bg: string;
  card: string;
  field: string;
  button: string;
  fg: string;
  muted: string;
  line: string;
  'line-strong': string;
  accent: string;
  'on-accent': string;
  on: string;
  'on-bg': string;
  focus: string;
  warn: string;
  danger: string;
  /** Text of estimated (not measured) figures. */
  estimate: string;
  meter: string;
  'meter-track': string;
  peak: string;
  cap: string;
  'series-off': string;
  'series-on': string;
  'series-now': string;
  'series-avg': string;
  'series-model': string;
  'series-true': string;
  grid: string;
}

export const THEMES: Record<ThemeName, ThemeColors> = {
  dark: {
    bg: '#0e1318',
    card: '#171f27',
    field: '#0f161d',
    button: '#222c36',
    fg: '#f1f4f6',
    muted: '#aab5bf',
    line: '#2b3641',
    'line-strong': '#6b7a89',
    accent: '#ffb41f',
    'on-accent': '#1b1300',
    on: '#6fe08a',
    'on-bg': '#1d3a27',
    focus: '#8ccfff',
    warn: '#ffc24d',
    danger: '#ff7a72',
    estimate: '#e3b0ff',
    meter: '#6fc9ff',
    'meter-track': '#0b1116',
    peak: '#f1f4f6',
    cap: '#ff7a72',
    'series-off': '#ff8f5e',
    'series-on': '#63cbff',
    'series-now': '#ffd36b',
    'series-avg': '#7fe39a',
    'series-model': '#c8a8ff',
    'series-true': '#9aa6b2',
    grid: '#26313b',
  },
  light: {
    bg: '#edf0f3',
    card: '#ffffff',
    field: '#ffffff',
    button: '#f2f4f7',
    fg: '#11181f',
    muted: '#4a5561',
    line: '#d2d8de',
    'line-strong': '#7b8895',
    accent: '#1553b8',
    'on-accent': '#ffffff',
    on: '#1a7a3c',
    'on-bg': '#daf1e1',
    focus: '#1553b8',
    warn: '#8a4a00',
    danger: '#ad2417',
    estimate: '#7a3aa3',
    meter: '#0d67ad',
    'meter-track': '#e2e7ec',
    peak: '#11181f',
    cap: '#c22020',
    'series-off': '#b8440f',
    'series-on': '#0b62a0',
    'series-now': '#8d5f00',
    'series-avg': '#1b7a3a',
    'series-model': '#6a30c9',
    'series-true': '#687584',
    grid: '#e0e5ea',
  },
};

/** Text colours on the backgrounds they appear on (4.5:1 each). */
export const TEXT_PAIRS: readonly [keyof ThemeColors, keyof ThemeColors][] = [
  ['fg', 'bg'],
  ['fg', 'card'],
  ['fg', 'field'],
  ['fg', 'button'],
  ['fg', 'on-bg'],
  ['muted', 'bg'],
  ['muted', 'card'],
  ['on-accent', 'accent'],
  ['warn', 'card'],
  ['warn', 'bg'],
  ['danger', 'card'],
  ['estimate', 'card'],
  ['on', 'card'],
  // the big attenuation readouts and the tracked frequency are drawn in series colours
  ['series-now', 'card'],
  ['series-avg', 'card'],
];

/** Lines, bars and markers that carry meaning, on the card they are drawn on (3:1 each). */
export const GRAPHIC_PAIRS: readonly [keyof ThemeColors, keyof ThemeColors][] = [
  ['series-off', 'card'],
  ['series-on', 'card'],
  ['series-model', 'card'],
  ['series-true', 'card'],
  ['meter', 'meter-track'],
  ['cap', 'meter-track'],
  ['peak', 'meter-track'],
  ['line-strong', 'card'],
  ['focus', 'bg'],
];

/** The reports' colours (printed pages on white paper). */
export const REPORT = {
  ink: '#1c2530',
  muted: '#56606b',
  line: '#dfe3e8',
  paper: '#ffffff',
  wash: '#f5f7f9',
  /** Background of the "scripts are off" notice. */
  notice: '#fbf0cf',
  /** Plot series, one per role, the same in every plot. */
  off: '#b3500f',
  on: '#0c6f6a',
  reference: '#6532c2',
  bound: '#b3213f',
  model: '#1f4fc4',
  truth: '#7d8792',
  coherence: '#34495e',
  cap: '#b3213f',
  /** Verdict borders. */
  verdictBroadband: '#1d7a3b',
  verdictPredictable: '#b3500f',
  verdictUnknown: '#7d8792',
} as const;

/** Report text colours on their backgrounds (4.5:1 each). */
export const REPORT_TEXT_PAIRS: readonly [keyof typeof REPORT, keyof typeof REPORT][] = [
  ['ink', 'paper'],
  ['ink', 'wash'],
  ['ink', 'notice'],
  ['muted', 'paper'],
  ['muted', 'wash'],
];

/** Report plot lines and borders on paper (3:1 each). */
export const REPORT_GRAPHIC_PAIRS: readonly [keyof typeof REPORT, keyof typeof REPORT][] = [
  ['off', 'paper'],
  ['on', 'paper'],
  ['reference', 'paper'],
  ['bound', 'paper'],
  ['model', 'paper'],
  ['truth', 'paper'],
  ['coherence', 'paper'],
  ['cap', 'paper'],
  ['verdictBroadband', 'paper'],
  ['verdictPredictable', 'paper'],
  ['verdictUnknown', 'paper'],
];
