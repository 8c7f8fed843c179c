import { DOCUMENT } from '@angular/common';
import { Injectable, effect, inject, signal } from '@angular/core';

export type ThemeChoice = 'system' | 'light' | 'dark';
const STORAGE_KEY = 'whitecap.theme';

/** Light, dark, or the system's choice; remembered in this browser. */
@Injectable({ providedIn: 'root' })
export class ThemeChoiceStore {
  private readonly document = inject(DOCUMENT);
  readonly choice = signal<ThemeChoice>(this.read());

  constructor() {
    effect(() => {
      const root = this.document.documentElement;
      root.classList.toggle('theme-light', this.choice() === 'light');
      root.classList.toggle('theme-dark', this.choice() === 'dark');
      try {
        localStorage.setItem(STORAGE_KEY, this.choice());
      } catch {
        /* storage may be unavailable */
      }
    });
  }

  next(): void {
    const order: ThemeChoice[] = ['system', 'light', 'dark'];
    this.choice.set(order[(order.indexOf(this.choice()) + 1) % order.length]);
  }

  private read(): ThemeChoice {
    try {
      const v = localStorage.getItem(STORAGE_KEY);
      return v === 'light' || v === 'dark' ? v : 'system';
    } catch {
      return 'system';
    }
  }
}
