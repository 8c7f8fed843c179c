import { DestroyRef, Injectable, inject, signal } from '@angular/core';

/** The time now, as a signal that ticks every second, for ages that count up on screen. */
@Injectable({ providedIn: 'root' })
export class TickingClock {
  private readonly tick = signal(Date.now());
  readonly now = this.tick.asReadonly();

  constructor() {
    const timer = setInterval(() => this.tick.set(Date.now()), 1000);
    inject(DestroyRef).onDestroy(() => clearInterval(timer));
  }
}
