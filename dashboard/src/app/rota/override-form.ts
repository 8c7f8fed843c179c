import { ChangeDetectionStrategy, Component, computed, inject, input, output, signal } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { FormBuilder, ReactiveFormsModule } from '@angular/forms';
import { MatButtonModule } from '@angular/material/button';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatSelectModule } from '@angular/material/select';
import { firstValueFrom, startWith } from 'rxjs';
import type { RotaSummary } from '../../../../shared/src/api/api-types';
import type { ProblemIssue } from '../feedback/problem-issues';
import { problemIssues } from '../feedback/problem-issues';
import { problemMessage } from '../feedback/problem-message';
import { RotaApi, type RotaPerson } from './rota-api';
import { issueLabel, overrideInput } from './rota-draft';
import { inRotaAndViewerZone, offsetLabel, zonedLocalToInstant } from './zoned-time';

/** One-off swap of the watch: from, to (read in the rota's time zone), who, and why. */
@Component({
  selector: 'wc-override-form',
  imports: [ReactiveFormsModule, MatFormFieldModule, MatInputModule, MatSelectModule, MatButtonModule],
  template: `
    <form [formGroup]="form" (ngSubmit)="addOverride()" [attr.aria-label]="'Add an override to ' + rota().name" novalidate>
      <h4>Add an override</h4>
      <p class="hint">
        From and to are read in the rota's time zone, <strong>{{ rota().timeZone }}</strong> ({{ offset() }}), whatever
        your own clock says. The person named is on watch for that span instead of the weekly shift.
      </p>
      <div class="fields">
        <mat-form-field appearance="outline" subscriptSizing="dynamic">
          <mat-label>From ({{ rota().timeZone }})</mat-label>
          <input matInput type="datetime-local" formControlName="from" required />
          @if (fromMine(); as t) { <mat-hint>{{ t }}</mat-hint> }
        </mat-form-field>
        <mat-form-field appearance="outline" subscriptSizing="dynamic">
          <mat-label>To ({{ rota().timeZone }})</mat-label>
          <input matInput type="datetime-local" formControlName="to" required />
          @if (toMine(); as t) { <mat-hint>{{ t }}</mat-hint> }
        </mat-form-field>
        <mat-form-field appearance="outline" subscriptSizing="dynamic">
          <mat-label>On watch instead</mat-label>
          <mat-select formControlName="userId">
            @for (p of people(); track p.userId) {
              <mat-option [value]="p.userId">{{ p.displayName }}</mat-option>
            }
          </mat-select>
        </mat-form-field>
        <mat-form-field appearance="outline" subscriptSizing="dynamic">
          <mat-label>Note</mat-label>
          <input matInput formControlName="note" maxlength="500" placeholder="e.g. swapped with Ravi for the yard drill" />
        </mat-form-field>
      </div>
      @if (problem() || issues().length) {
        <div class="error" role="alert">
          @if (problem(); as p) { <p>{{ p }}</p> }
          @if (issues().length) {
            <ul>
              @for (i of issues(); track $index) { <li><strong>{{ label(i.path) }}:</strong> {{ i.message }}</li> }
            </ul>
          }
        </div>
      }
      <div class="buttons">
        <button mat-stroked-button type="submit" [disabled]="saving()">Add override</button>
      </div>
    </form>
  `,
  styles: `
    h4 { margin: 0 0 4px; font: var(--mat-sys-title-small); }
    .hint { margin: 0 0 12px; color: var(--mat-sys-on-surface-variant); font-size: 0.9rem; }
    .fields { display: grid; grid-template-columns: repeat(auto-fill, minmax(220px, 1fr)); gap: 12px 16px; }
    .buttons { margin-top: 12px; }
    .error { margin: 12px 0 0; padding: 8px 12px; border-left: 4px solid var(--wc-magenta); background: color-mix(in srgb, var(--wc-magenta) 10%, transparent); }
    .error p, .error ul { margin: 0; }
    .error ul { padding-left: 18px; }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class OverrideForm {
  private readonly api = inject(RotaApi);
  private readonly fb = inject(FormBuilder).nonNullable;
  readonly rota = input.required<RotaSummary>();
  readonly people = input<RotaPerson[]>([]);
  /** The rota as it stands after the override was added. */
  readonly added = output<RotaSummary>();

  protected readonly form = this.fb.group({ from: [''], to: [''], userId: [null as number | null], note: [''] });
  private readonly value = toSignal(this.form.valueChanges.pipe(startWith(this.form.getRawValue())), { initialValue: this.form.getRawValue() });
  protected readonly offset = computed(() => offsetLabel(this.rota().timeZone));
  protected readonly fromMine = computed(() => this.yourTime(this.value().from ?? ''));
  protected readonly toMine = computed(() => this.yourTime(this.value().to ?? ''));
  protected readonly saving = signal(false);
  protected readonly problem = signal<string | null>(null);
  protected readonly issues = signal<ProblemIssue[]>([]);
  protected readonly label = issueLabel;

  protected async addOverride(): Promise<void> {
    const rota = this.rota();
    const { input, issues } = overrideInput(this.form.getRawValue(), rota.timeZone);
    this.problem.set(null);
    this.issues.set(issues);
    if (!input) return;
    this.saving.set(true);
    try {
      const updated = await firstValueFrom(this.api.addOverride(rota.id, input));
      this.form.reset();
      this.added.emit(updated);
    } catch (err) {
      this.problem.set(problemMessage(err));
      this.issues.set(problemIssues(err));
    } finally {
      this.saving.set(false);
    }
  }

  /** What a typed local time is on the viewer's clock, when it reads differently. */
  private yourTime(local: string): string | null {
    const iso = zonedLocalToInstant(local, this.rota().timeZone);
    if (!iso) return null;
    const both = inRotaAndViewerZone(iso, this.rota().timeZone);
    return both.viewer ? `${both.viewer} your time` : `${both.rota}`;
  }
}
