/**
 * <ancb-plant-options>: the broadband controller's options for a changing plant (issue 14,
 * src/dsp/plant-tracking.ts), as two checkboxes:
 *
 *   - "Track path changes": `controller.onlineModel` with the auxiliary-noise probe (defaults);
 *   - "Neutralise feedback": `controller.feedbackNeutralisation: true` (needs a feedback-path model:
 *     the simulated plant has one; a live session is refused until one is identified).
 *
 * It fires `ancb-plant-options` with the controller's new `{onlineModel?, feedbackNeutralisation?}`
 * fields; <ancb-controls> merges them into its settings. IMC has no reference mic: no neutralisation.
 */
import { LitElement, css, html } from 'lit';
import { shared } from './theme.ts';
import { emit } from './emit.ts';
import type { BroadbandControllerConfig } from '../web/index.ts';

export interface PlantOptions {
  onlineModel?: { method: 'auxiliary-noise' } | undefined;
  feedbackNeutralisation?: boolean | undefined;
}

export class AncbPlantOptions extends LitElement {
  static override properties = { controller: { attribute: false } };
  static override styles = [
    shared,
    css`
      .opts { display: flex; flex-wrap: wrap; gap: 0.4rem 1.2rem; grid-column: 1 / -1; }
      label { display: flex; align-items: center; gap: 0.45rem; font-weight: 600; }
      input { width: 1.3rem; height: 1.3rem; accent-color: var(--ancb-accent); }
      .hint { font-weight: 400; font-size: 0.85rem; color: var(--ancb-muted); }
    `,
  ];

  declare controller: BroadbandControllerConfig;

  private change(next: PlantOptions): void {
    const c = this.controller;
    const current: PlantOptions = {
      ...(c.onlineModel ? { onlineModel: { method: 'auxiliary-noise' as const } } : {}),
      ...(c.feedbackNeutralisation ? { feedbackNeutralisation: true } : {}),
    };
    emit(this, 'ancb-plant-options', { ...current, ...next });
  }

  protected override render(): unknown {
    const c = this.controller;
    if (!c) return '';
    return html`<div class="opts">
      <label><input id="online" type="checkbox" .checked=${Boolean(c.onlineModel)}
        @change=${(e: Event) => this.change({ onlineModel: (e.target as HTMLInputElement).checked ? { method: 'auxiliary-noise' } : undefined })} />
        Track path changes <span class="hint">(faint noise probe)</span></label>
      ${c.algorithm === 'imc'
        ? ''
        : html`<label><input id="neutralise" type="checkbox" .checked=${Boolean(c.feedbackNeutralisation)}
            @change=${(e: Event) => this.change({ feedbackNeutralisation: (e.target as HTMLInputElement).checked || undefined })} />
            Neutralise feedback <span class="hint">(loudspeaker → reference mic)</span></label>`}
    </div>`;
  }
}

if (!customElements.get('ancb-plant-options')) customElements.define('ancb-plant-options', AncbPlantOptions);
