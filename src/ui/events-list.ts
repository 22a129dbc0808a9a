/**
 * <ancb-events>: the event log (guard, limiter, input and latency events), newest first by time
 * (orderEvents), each with its values in words and units (eventDetails). Times are seconds of panel
 * time: the panel moves the times of a restarted plant on past the previous run's, so the order
 * holds across restarts. Events are rare, so the list re-renders on each batch; the display loop
 * batches them per animation frame.
 */
import { LitElement, css, html } from 'lit';
import { shared } from './theme.ts';
import type { PanelEvent } from '../web/index.ts';
import { ACTION_TEXT, EVENT_TEXT, eventDetails, orderEvents } from './event-text.ts';
import { fmtSeconds } from './format.ts';

export const MAX_EVENTS = 200;

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
    // kept in arrival order; shown in time order
    this.events = [...this.events, ...list].slice(-MAX_EVENTS);
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
            ${orderEvents(this.events).map(
              (e) => html`<li data-cause=${e.cause}>
                <span class="t">${fmtSeconds(e.timeS)}</span>
                <span>${EVENT_TEXT[e.cause]}${eventDetails(e) ? html` <span class="muted">(${eventDetails(e)})</span>` : ''}</span>
                <span class="action">${ACTION_TEXT[e.action]}</span>
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
