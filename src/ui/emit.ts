/**
 * Panel elements tell the app what the user did through DOM events named `ancb-…` that bubble out of
 * their shadow roots; this is the one way they fire them.
 */
export function emit(from: EventTarget, name: string, detail?: unknown): void {
  from.dispatchEvent(new CustomEvent(name, { detail, bubbles: true, composed: true }));
}
