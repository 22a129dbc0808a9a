/**
 * A display loop owned by an element: requestAnimationFrame while the element is connected,
 * nothing while it is not. Meters and plots draw from here, not from Lit re-renders.
 */
import type { ReactiveController, ReactiveControllerHost } from 'lit';

export class FrameLoop implements ReactiveController {
  private id = 0;
  private running = false;

  constructor(
    host: ReactiveControllerHost,
    private readonly tick: (timeMs: number) => void,
  ) {
    host.addController(this);
  }

  hostConnected(): void {
    this.running = true;
    const step = (t: number): void => {
      if (!this.running) return;
      this.tick(t);
      this.id = requestAnimationFrame(step);
    };
    this.id = requestAnimationFrame(step);
  }

  hostDisconnected(): void {
    this.running = false;
    cancelAnimationFrame(this.id);
  }
}
