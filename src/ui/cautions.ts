/**
 * <ancb-cautions>: hearing-safety cautions, shown in a modal dialog before the first live start
 * (and available from the panel at any time). `ask()` resolves true once the user confirms.
 * The native <dialog> traps focus and closes on Escape, so it works from the keyboard.
 */
import { LitElement, css, html } from 'lit';
import { shared, dialogStyles } from './theme.ts';

export const CAUTION_POINTS = [
  'Start at a low volume and raise it slowly. The output cap limits the level in the signal, not what your amplifier and loudspeaker make of it.',
  'Prefer headphones at a low level, or a loudspeaker at a distance from anyone’s ears.',
  'Stop at once if you feel discomfort or hear ringing in your ears, and keep breaks between sessions.',
  'Occupational exposure limits differ by jurisdiction (for example NIOSH, 1998: 85 dBA over 8 hours with a 3 dB exchange rate). Follow local regulations and occupational-health advice.',
  'This tool does not certify hearing safety. Levels are shown in dBFS; dB SPL appears only for a channel you have calibrated.',
];

export class AncbCautions extends LitElement {
  static override styles = [
    shared,
    dialogStyles,
    css`
      dialog {
        max-width: 40rem;
        padding: 1.2rem 1.4rem;
        font-size: 1.05rem;
      }
      h2 {
        font-size: 1.3rem;
        color: var(--ancb-warn);
      }
      li {
        margin: 0.45rem 0;
        line-height: 1.4;
      }
      dialog .buttons {
        margin-top: 1rem;
      }
    `,
  ];

  private resolve: ((ok: boolean) => void) | null = null;

  private get dialog(): HTMLDialogElement | null {
    return this.renderRoot.querySelector('dialog');
  }

  /** Show the cautions; resolves true when the user confirms, false when cancelled. */
  async ask(): Promise<boolean> {
    await this.updateComplete;
    const d = this.dialog;
    if (!d) return false;
    if (!d.open) d.showModal();
    (this.renderRoot.querySelector('#ok') as HTMLButtonElement | null)?.focus();
    return new Promise((resolve) => {
      this.resolve = resolve;
    });
  }

  private close(ok: boolean): void {
    this.dialog?.close();
    const r = this.resolve;
    this.resolve = null;
    r?.(ok);
  }

  protected override render(): unknown {
    return html`<dialog aria-labelledby="c-h" @cancel=${(e: Event) => { e.preventDefault(); this.close(false); }}>
      <h2 id="c-h">Before you play sound: hearing safety</h2>
      <ul>
        ${CAUTION_POINTS.map((p) => html`<li>${p}</li>`)}
      </ul>
      <div class="buttons">
        <button id="cancel" @click=${() => this.close(false)}>Cancel</button>
        <button id="ok" class="primary" @click=${() => this.close(true)}>I understand, continue</button>
      </div>
    </dialog>`;
  }
}

if (!customElements.get('ancb-cautions')) customElements.define('ancb-cautions', AncbCautions);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-cautions': AncbCautions;
  }
}
