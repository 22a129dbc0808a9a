/**
 * Colours and type for the panel, as CSS custom properties on the document root (they inherit into
 * every shadow root). The colours are the project's palette (src/palette.ts, contrast-checked to
 * WCAG 2.1 AA there); this module writes the chosen theme's colours as `--ancb-<name>` properties.
 * Two themes, both for a projector across a room: large type, strong contrast, and series colours
 * that differ in lightness as well as hue.
 */
import { css } from 'lit';
import { THEMES, type ThemeName } from '../web/index.ts';

export type { ThemeName };

const STORAGE_KEY = 'ancbench.theme';

export function initialTheme(): ThemeName {
  try {
    const t = localStorage.getItem(STORAGE_KEY);
    if (t === 'dark' || t === 'light') return t;
  } catch {
    // no storage: follow the system
  }
  return globalThis.matchMedia?.('(prefers-color-scheme: light)').matches ? 'light' : 'dark';
}

export function applyTheme(t: ThemeName): void {
  const root = document.documentElement;
  root.dataset.theme = t;
  root.style.colorScheme = t;
  for (const [name, value] of Object.entries(THEMES[t])) root.style.setProperty(`--ancb-${name}`, value);
  try {
    localStorage.setItem(STORAGE_KEY, t);
  } catch {
    // ignore
  }
}

/** Current value of a theme variable (for canvas and plot colours). */
export function themeColor(name: string): string {
  return getComputedStyle(document.documentElement).getPropertyValue(name).trim() || '#888';
}

/** Styles shared by the panel's elements: cards, labels, buttons and form fields. */
export const shared = css`
  :host {
    color: var(--ancb-fg);
    font-family: var(--ancb-font);
  }
  .card {
    background: var(--ancb-card);
    border: 1px solid var(--ancb-line);
    border-radius: 10px;
    padding: 0.8rem 1rem;
  }
  h2 {
    font-size: 1.05rem;
    margin: 0 0 0.5rem;
    font-weight: 650;
    letter-spacing: 0.01em;
  }
  .muted {
    color: var(--ancb-muted);
  }
  .small {
    font-size: 0.85rem;
  }
  button,
  select,
  input {
    font: inherit;
    color: var(--ancb-fg);
  }
  button {
    background: var(--ancb-button);
    border: 2px solid var(--ancb-line-strong);
    border-radius: 8px;
    padding: 0.45rem 0.9rem;
    cursor: pointer;
    min-height: 2.6rem;
  }
  button.primary {
    background: var(--ancb-accent);
    border-color: var(--ancb-accent);
    color: var(--ancb-on-accent);
    font-weight: 650;
  }
  button[aria-pressed='true'] {
    background: var(--ancb-on-bg);
    border-color: var(--ancb-on);
  }
  button:disabled {
    opacity: 0.45;
    cursor: not-allowed;
  }
  select,
  input[type='number'],
  input[type='text'] {
    background: var(--ancb-field);
    border: 2px solid var(--ancb-line-strong);
    border-radius: 6px;
    padding: 0.3rem 0.45rem;
    min-height: 2.3rem;
  }
  input[type='range'] {
    accent-color: var(--ancb-accent);
  }
  :focus-visible {
    outline: 3px solid var(--ancb-focus);
    outline-offset: 2px;
  }
  .warn {
    color: var(--ancb-warn);
  }
  /* Measured figures and estimates look different everywhere: an estimate is italic, underlined with
     dots and in its own colour, and its tag says "estimate"; a measurement keeps the plain face. */
  .est {
    font-style: italic;
    color: var(--ancb-estimate);
    text-decoration: underline dotted;
    text-underline-offset: 0.2em;
  }
  .tag {
    display: inline-block;
    font-size: 0.7rem;
    font-style: normal;
    font-weight: 650;
    letter-spacing: 0.04em;
    text-transform: uppercase;
    border: 1px solid currentColor;
    border-radius: 4px;
    padding: 0 0.25rem;
    vertical-align: 0.15em;
  }
  .meas .tag {
    color: var(--ancb-on);
  }
`;

/** Label/field grids and paired slider + field rows, shared by the settings cards. */
export const formLayout = css`
  :host {
    display: block;
  }
  .grid {
    display: grid;
    grid-template-columns: auto minmax(0, 1fr);
    gap: 0.55rem 0.7rem;
    align-items: center;
  }
  label,
  legend {
    font-weight: 600;
  }
  select {
    width: 100%;
    min-width: 0;
  }
  .pair {
    display: flex;
    gap: 0.5rem;
    align-items: center;
    min-width: 0;
  }
  .pair input[type='range'] {
    flex: 1;
    min-width: 5rem;
  }
  fieldset {
    border: 0;
    padding: 0;
    margin: 0.6rem 0 0;
  }
  fieldset label {
    font-weight: 400;
    display: flex;
    gap: 0.4rem;
    align-items: center;
  }
  .verdict {
    border-left: 4px solid var(--ancb-on);
    padding-left: 0.6rem;
    line-height: 1.4;
  }
  .verdict.no {
    border-left-color: var(--ancb-warn);
  }
`;

/** Confirm and caution dialogs (native <dialog>: modal, focus trapped, Escape cancels). */
export const dialogStyles = css`
  dialog {
    max-width: 36rem;
    background: var(--ancb-card);
    color: var(--ancb-fg);
    border: 2px solid var(--ancb-warn);
    border-radius: 12px;
    padding: 1rem 1.2rem;
  }
  dialog::backdrop {
    background: rgb(0 0 0 / 0.6);
  }
  dialog .buttons {
    display: flex;
    gap: 0.8rem;
    justify-content: flex-end;
    margin-top: 0.8rem;
  }
`;

/** Number tables (readings, per-harmonic figures): figures right-aligned in the mono face, first column left. */
export const tableStyles = css`
  th,
  td {
    text-align: right;
    padding: 0.2rem 0.45rem;
    border-bottom: 1px solid var(--ancb-line);
  }
  th:first-child,
  td:first-child {
    text-align: left;
  }
  td {
    font-family: var(--ancb-mono);
  }
`;
