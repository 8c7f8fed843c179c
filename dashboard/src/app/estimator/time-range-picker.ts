import { ChangeDetectionStrategy, Component, computed, input, output, signal } from '@angular/core';
import { MatButtonModule } from '@angular/material/button';
import { MatButtonToggleModule } from '@angular/material/button-toggle';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import {
  RANGE_PRESETS,
  customRangeProblem,
  fromLocalInput,
  presetKey,
  resolveRange,
  toLocalInput,
  type TimeRange,
} from './time-range';

/** Picks the charts' time range: the last 15 min, 1 h, 6 h, 24 h or 7 d, or a custom start and end. */
@Component({
  selector: 'wc-time-range-picker',
  imports: [MatButtonToggleModule, MatFormFieldModule, MatInputModule, MatButtonModule],
  template: `
    <mat-button-toggle-group
      [value]="selected()"
      (change)="choose($event.value)"
      aria-label="Time range of the charts"
      hideSingleSelectionIndicator
    >
      @for (p of presets; track p.key) {
        <mat-button-toggle [value]="p.key">Last {{ p.label }}</mat-button-toggle>
      }
      <mat-button-toggle value="custom">Custom</mat-button-toggle>
    </mat-button-toggle-group>
    @if (customOpen()) {
      <form class="custom" (submit)="applyCustom($event)" aria-label="Custom time range" novalidate>
        <mat-form-field appearance="outline" subscriptSizing="dynamic">
          <mat-label>From</mat-label>
          <input matInput type="datetime-local" name="from" [value]="fromText()" (input)="fromText.set($any($event.target).value)" />
        </mat-form-field>
        <mat-form-field appearance="outline" subscriptSizing="dynamic">
          <mat-label>To</mat-label>
          <input matInput type="datetime-local" name="to" [value]="toText()" (input)="toText.set($any($event.target).value)" />
        </mat-form-field>
        <button mat-flat-button type="submit">Show this range</button>
        @if (problem(); as p) {
          <p class="problem" role="alert">{{ p }}</p>
        }
      </form>
    }
  `,
  styles: `
    :host { display: flex; flex-direction: column; gap: 12px; }
    .custom { display: flex; flex-wrap: wrap; align-items: center; gap: 12px; }
    .problem {
      flex-basis: 100%;
      margin: 0;
      padding: 6px 10px;
      border-left: 4px solid var(--wc-magenta);
      background: color-mix(in srgb, var(--wc-magenta) 10%, transparent);
    }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class TimeRangePicker {
  readonly range = input.required<TimeRange>();
  readonly rangeChange = output<TimeRange>();
  protected readonly presets = RANGE_PRESETS;
  protected readonly customOpen = signal(false);
  protected readonly selected = computed(() => (this.customOpen() ? 'custom' : presetKey(this.range())));
  protected readonly fromText = signal('');
  protected readonly toText = signal('');
  protected readonly problem = signal<string | null>(null);

  protected choose(key: string): void {
    if (key === 'custom') {
      this.openCustom();
      return;
    }
    const preset = RANGE_PRESETS.find((p) => p.key === key);
    if (!preset) return;
    this.customOpen.set(false);
    this.problem.set(null);
    this.rangeChange.emit({ kind: 'last', ms: preset.ms });
  }

  protected applyCustom(event: Event): void {
    event.preventDefault();
    const from = fromLocalInput(this.fromText());
    const to = fromLocalInput(this.toText());
    const problem = customRangeProblem(from, to);
    this.problem.set(problem);
    if (problem || !from || !to) return;
    this.rangeChange.emit({ kind: 'custom', from, to });
  }

  /** Starts the custom form from the range shown now. */
  private openCustom(): void {
    const { from, to } = resolveRange(this.range());
    this.fromText.set(toLocalInput(from));
    this.toText.set(toLocalInput(to));
    this.problem.set(null);
    this.customOpen.set(true);
  }
}
