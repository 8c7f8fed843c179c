import { DOCUMENT } from '@angular/common';
import { DestroyRef, Injectable, computed, inject, signal } from '@angular/core';
import { ThemeChoiceStore } from '../shell/theme-choice';

/** Colours for charts drawn on a canvas (which cannot read CSS variables). */
export interface ChartLook {
  dark: boolean;
  text: string;
  mutedText: string;
  grid: string;
  surface: string;
  teal: string;
  tealLight: string;
  tealDeep: string;
  sand: string;
  ochre: string;
  magenta: string;
  ink: string;
  silent: string;
  /** Series colours for vector components 1, 2, … */
  components: string[];
}

// The palette of styles.scss (--wc-*), for canvas drawing.
const PALETTE = {
  teal900: '#08363a',
  teal700: '#0e4f55',
  teal500: '#1f7a80',
  teal200: '#a9d4d2',
  ink900: '#151b23',
  ink700: '#2b3440',
  ink400: '#66707d',
  sand50: '#fbf7ef',
  sand100: '#f3ead8',
  sand300: '#dccaa6',
  ochre: '#c98a1b',
  magenta: '#b0246e',
};

export function chartLook(dark: boolean): ChartLook {
  return dark
    ? {
        dark,
        text: '#e8e2d6',
        mutedText: '#c3bba9',
        grid: '#39424d',
        surface: '#11171d',
        teal: '#4fb3b8',
        tealLight: PALETTE.teal200,
        tealDeep: PALETTE.teal700,
        sand: PALETTE.sand300,
        ochre: '#e0a43a',
        magenta: '#e0529a',
        ink: '#e8e2d6',
        silent: '#8d96a3',
        components: [PALETTE.teal200, '#e0a43a', '#d8a6c4', PALETTE.sand300],
      }
    : {
        dark,
        text: PALETTE.ink900,
        mutedText: PALETTE.ink700,
        grid: PALETTE.sand300,
        surface: PALETTE.sand50,
        teal: PALETTE.teal500,
        tealLight: PALETTE.teal200,
        tealDeep: PALETTE.teal900,
        sand: PALETTE.sand300,
        ochre: PALETTE.ochre,
        magenta: PALETTE.magenta,
        ink: PALETTE.ink900,
        silent: PALETTE.ink400,
        components: [PALETTE.teal700, PALETTE.ochre, PALETTE.magenta, PALETTE.ink400],
      };
}

/** The chart colours for the theme in use (the user's choice, or the system's). */
@Injectable({ providedIn: 'root' })
export class ChartTheme {
  private readonly theme = inject(ThemeChoiceStore);
  private readonly systemDark = signal(false);
  readonly look = computed(() => {
    const choice = this.theme.choice();
    return chartLook(choice === 'dark' || (choice === 'system' && this.systemDark()));
  });

  constructor() {
    const view = inject(DOCUMENT).defaultView;
    const query = view?.matchMedia?.('(prefers-color-scheme: dark)');
    if (!query) return;
    this.systemDark.set(query.matches);
    const listen = (e: MediaQueryListEvent) => this.systemDark.set(e.matches);
    query.addEventListener('change', listen);
    inject(DestroyRef).onDestroy(() => query.removeEventListener('change', listen));
  }
}
