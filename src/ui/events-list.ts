/**
 * <ancb-events>: the event log (guard, limiter, input and latency events), newest first. Events are
 * rare, so the list re-renders on each one; the display loop batches them per animation frame.
 */
import { LitElement, css, html } from 'lit';
import { shared } from './theme.ts';
import { EVENT_TEXT, type PanelEvent } from '../web/index.ts';

export const MAX_EVENTS = 200;

function valuesText(e: PanelEvent): string {
  return Object.entries(e.values)
    .filter(([, v]) => Number.isFinite(v))
    .map(([k, v]) => `${k} ${Math.abs(v) >= 100 || Number.isInteger(v) ? v.toFixed(0) : v.toFixed(1)}`)
    .join(', ');
}

export class AncbEvents extends LitElement {
  static override properties = { events: { attribute: false } };
  static override styles = [
    shared,
    css`
      :host {
        display: block;
      }
      .list {
        max-height: 13rem;
        overflow: auto;
        margin: 0;
        padding: 0;
        list-style: none;
        font-size: 0.95rem;
      }
      li {
        display: grid;
        grid-template-columns: 5.5rem 1fr auto;
        gap: 0.6rem;
        padding: 0.3rem 0;
        border-bottom: 1px solid var(--ancb-line);
      }
      .t {
        font-family: var(--ancb-mono);
        color: var(--ancb-muted);
      }
      .action {
        font-weight: 600;
      }
      .empty {
        color: var(--ancb-muted);
      }
    `,
  ];

  declare events: PanelEvent[];

  constructor() {
    super();
    this.events = [];
  }

  add(list: PanelEvent[]): void {
    if (list.length === 0) return;
    this.events = [...list.reverse(), ...this.events].slice(0, MAX_EVENTS);
  }

  clear(): void {
    this.events = [];
  }

  protected override render(): unknown {
    return html`<section class="card" aria-labelledby="ev-h">
      <h2 id="ev-h">Events <span class="muted small">(${this.events.length})</span></h2>
      ${this.events.length === 0
        ? html`<p class="empty">No events yet. Guard, limiter, input and latency events appear here.</p>`
        : html`<ul class="list" tabindex="0" aria-label="event log, newest first" aria-live="polite">
            ${this.events.map(
              (e) => html`<li data-cause=${e.cause}>
                <span class="t">${e.timeS.toFixed(2)} s</span>
                <span>${EVENT_TEXT[e.cause]}${valuesText(e) ? html` <span class="muted">(${valuesText(e)})</span>` : ''}</span>
                <span class="action">${e.action === 'none' ? '' : e.action.replace(/-/g, ' ')}</span>
              </li>`,
            )}
          </ul>`}
    </section>`;
  }
}

if (!customElements.get('ancb-events')) customElements.define('ancb-events', AncbEvents);

declare global {
  interface HTMLElementTagNameMap {
    'ancb-events': AncbEvents;
  }
}
