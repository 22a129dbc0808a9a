/**
 * <ancb-output-limit>: the controller's output constraint beside the output meter: a choice of method
 * (`controller.outputConstraint`, src/dsp/output-constraint.ts) and the output-limited state.
 *
 * The display loop calls `show(limited)` every frame with the engine's `outputLimited` meter (1 while
 * the controller's constraint acts or the limiter holds the cap); the text changes only when the
 * state does. Choosing a method fires `ancb-output-constraint` with the method as detail.
 */
import { LitElement, css, html } from 'lit';
import { shared } from './theme.ts';
import { emit } from './emit.ts';
import { fmtDb } from './format.ts';
import { DEFAULT_OUTPUT_CONSTRAINT, DEFAULT_OUTPUT_MARGIN_DB, type OutputConstraintMethod } from '../web/index.ts';

const METHODS: { value: OutputConstraintMethod; label: string }[] = [
  { value: 'rescale', label: 'Rescale the filter at the cap' },
  { value: 'effort', label: 'Penalise output effort' },
  { value: 'none', label: 'Limiter alone' },
];

export class AncbOutputLimit extends LitElement {
  static override properties = {
    method: {},
    capDbfs: { type: Number },
    limited: { state: true },
  };

  static override styles = [
    shared,
    css`
      :host {
        display: flex;
        flex-wrap: wrap;
        gap: 0.6rem;
        align-items: center;
        font-size: 0.9rem;
      }
      .state {
        color: var(--ancb-muted);
      }
      .state[data-limited='1'] {
        color: var(--ancb-warn);
        font-weight: 600;
      }
    `,
  ];

  declare method: OutputConstraintMethod;
  /** The output cap, dBFS sample peak. */
  declare capDbfs: number;
  declare limited: number;

  constructor() {
    super();
    this.method = DEFAULT_OUTPUT_CONSTRAINT;
    this.limited = 0;
    this.capDbfs = NaN;
  }

  /** Per frame: 1 while the output is limited, else 0. Re-renders only on a change. */
  show(limited: number): void {
    const v = limited === 1 ? 1 : 0;
    if (v !== this.limited) this.limited = v;
  }

  override render() {
    const cap = Number.isFinite(this.capDbfs) ? `the ${fmtDb(this.capDbfs)} dBFS cap` : 'the cap';
    const text =
      this.limited === 1
        ? this.method === 'none'
          ? `output-limited: the limiter holds the output at ${cap}; cancelling more needs a higher cap`
          : `output-limited: the controller keeps its output ${DEFAULT_OUTPUT_MARGIN_DB} dB under ${cap} (not a fault); cancelling more needs a higher cap`
        : 'output within the cap';
    return html`<label for="oc">Output constraint</label>
      <select id="oc" .value=${this.method} @change=${(e: Event) => emit(this, 'ancb-output-constraint', (e.target as HTMLSelectElement).value)}>
        ${METHODS.map((m) => html`<option value=${m.value} ?selected=${m.value === this.method}>${m.label}</option>`)}
      </select>
      <span class="state" role="status" data-limited=${String(this.limited)}>${text}</span>`;
  }
}

if (!customElements.get('ancb-output-limit')) customElements.define('ancb-output-limit', AncbOutputLimit);
