import { ChangeDetectionStrategy, Component, computed, input, output, signal } from '@angular/core';
import { MatButtonToggleModule } from '@angular/material/button-toggle';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { WINDOW_PRESETS, customWindowProblem, fromLocalInput, toLocalInput, windowEnds, windowKey, type StudyWindow } from './study-window';

/**
 * Picks a window of field data: the last 1 h, 24 h or 7 days, or custom ends.
 * Emits null while the custom ends cannot be used (the problem is shown in words).
 */
@Component({
  selector: 'wc-window-picker',
  imports: [MatButtonToggleModule, MatFormFieldModule, MatInputModule],
  template: `
    <mat-button-toggle-group [value]="selected()" (change)="choose($event.value)" [attr.aria-label]="label()" hideSingleSelectionIndicator>
      @for (p of presets; track p.key) {
        <mat-button-toggle [value]="p.key">{{ p.label }}</mat-button-toggle>
      }
      <mat-button-toggle value="custom">Custom</mat-button-toggle>
    </mat-button-toggle-group>
    @if (customOpen()) {
      <div class="custom" role="group" [attr.aria-label]="label() + ', custom ends'">
        <mat-form-field appearance="outline" subscriptSizing="dynamic">
          <mat-label>From</mat-label>
          <input matInput type="datetime-local" [value]="fromText()" (input)="editFrom($any($event.target).value)" />
        </mat-form-field>
        <mat-form-field appearance="outline" subscriptSizing="dynamic">
          <mat-label>To</mat-label>
          <input matInput type="datetime-local" [value]="toText()" (input)="editTo($any($event.target).value)" />
        </mat-form-field>
        @if (problem(); as p) {
          <p class="problem" role="alert">{{ p }}</p>
        }
      </div>
    }
  `,
  styles: `
    :host { display: flex; flex-direction: column; gap: 10px; }
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
export class WindowPicker {
  /** The window in use (null while custom ends are being fixed). */
  readonly window = input.required<StudyWindow | null>();
  readonly label = input('Time window');
  readonly windowChange = output<StudyWindow | null>();
  protected readonly presets = WINDOW_PRESETS;
  protected readonly customOpen = signal(false);
  protected readonly selected = computed(() => {
    const w = this.window();
    return this.customOpen() || !w ? 'custom' : windowKey(w);
  });
  protected readonly fromText = signal('');
  protected readonly toText = signal('');
  protected readonly problem = signal<string | null>(null);

  protected choose(key: string): void {
    if (key === 'custom') {
      this.openCustom();
      return;
    }
    const preset = WINDOW_PRESETS.find((p) => p.key === key);
    if (!preset) return;
    this.customOpen.set(false);
    this.problem.set(null);
    this.windowChange.emit({ kind: 'last', ms: preset.ms });
  }

  protected editFrom(text: string): void {
    this.fromText.set(text);
    this.emitCustom();
  }

  protected editTo(text: string): void {
    this.toText.set(text);
    this.emitCustom();
  }

  private emitCustom(): void {
    const from = fromLocalInput(this.fromText());
    const to = fromLocalInput(this.toText());
    const problem = customWindowProblem(from, to);
    this.problem.set(problem);
    this.windowChange.emit(problem || !from || !to ? null : { kind: 'custom', from, to });
  }

  /** Starts the custom ends from the window chosen now. */
  private openCustom(): void {
    const w = this.window();
    const { from, to } = windowEnds(w ?? { kind: 'last', ms: 24 * 3_600_000 });
    this.fromText.set(toLocalInput(from));
    this.toText.set(toLocalInput(to));
    this.customOpen.set(true);
    this.emitCustom();
  }
}
