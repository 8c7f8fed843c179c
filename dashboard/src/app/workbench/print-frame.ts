import { ChangeDetectionStrategy, Component, ViewEncapsulation } from '@angular/core';

/**
 * The printed report's page: hides the dashboard's frame (top bar, navigation) and prints
 * in the light palette. Global rules, so they live here without view encapsulation, and
 * apply only while a study page is shown (`body:has(wc-study-page)`).
 */
@Component({
  selector: 'wc-print-frame',
  template: '',
  styleUrl: './print-frame.scss',
  encapsulation: ViewEncapsulation.None,
  host: { 'aria-hidden': 'true' },
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class PrintFrame {}
