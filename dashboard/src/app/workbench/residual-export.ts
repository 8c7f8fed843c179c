import { ChangeDetectionStrategy, Component, computed, inject, input, signal } from '@angular/core';
import { MatButtonModule } from '@angular/material/button';
import { MatButtonToggleModule } from '@angular/material/button-toggle';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import type { CohortOption } from './cohorts';
import { EstimatorPicker, type PickedEstimator } from './estimator-picker';
import { ResidualDownload } from './residual-download';
import { formatBytes, type ExportFormat } from './row-counter';
import { DEFAULT_WINDOW, windowEnds, type StudyWindow } from './study-window';
import { WindowPicker } from './window-picker';

/** Pulls the field residuals of chosen estimators over a window as CSV or JSON, with progress while they stream in. */
@Component({
  selector: 'wc-residual-export',
  imports: [MatButtonModule, MatButtonToggleModule, MatProgressBarModule, EstimatorPicker, WindowPicker],
  providers: [ResidualDownload],
  template: `
    <section class="panel" aria-labelledby="export-title">
      <h2 id="export-title">Export residuals</h2>
      <p class="hint">
        Every stored innovation sample of the chosen estimators in the window, with its predicted covariance, sequence number
        and time; the columns are described in the <a href="/api/docs" target="_blank" rel="noopener">API reference</a>.
      </p>
      <fieldset>
        <legend>Estimators</legend>
        <wc-estimator-picker idPrefix="export" [picked]="picked()" (pickedChange)="picked.set($event)" [cohorts]="cohorts()" />
      </fieldset>
      <fieldset>
        <legend>Window and format</legend>
        <wc-window-picker label="Window of the export" [window]="window()" (windowChange)="window.set($event)" />
        <mat-button-toggle-group [value]="format()" (change)="format.set($event.value)" aria-label="File format" hideSingleSelectionIndicator>
          <mat-button-toggle value="csv">CSV</mat-button-toggle>
          <mat-button-toggle value="json">JSON</mat-button-toggle>
        </mat-button-toggle-group>
      </fieldset>
      @if (problem(); as p) {
        <p class="problems" role="alert"><span class="material-symbols-outlined" aria-hidden="true">error</span> {{ p }}</p>
      }
      <div class="buttons">
        <button mat-flat-button type="button" (click)="downloadResiduals()" [disabled]="download.busy()">
          <span class="material-symbols-outlined" aria-hidden="true">download</span> Download {{ format() === 'csv' ? 'CSV' : 'JSON' }}
        </button>
        @if (download.busy()) {
          <button mat-stroked-button type="button" (click)="cancelDownload()">Cancel</button>
        }
      </div>
      @switch (state().phase) {
        @case ('waiting') {
          <div class="progress-box" role="status">
            <mat-progress-bar mode="query" aria-label="Waiting for the service" />
            <p>Waiting for the service to start sending…</p>
          </div>
        }
        @case ('receiving') {
          <div class="progress-box" role="status" aria-live="off">
            @if (percent() !== null) {
              <mat-progress-bar mode="determinate" [value]="percent() ?? 0" aria-label="Download progress" />
            } @else {
              <mat-progress-bar mode="indeterminate" aria-label="Download progress" />
            }
            <p>
              Receiving {{ state().fileName }}:
              <span class="figures" data-testid="download-figures">{{ rowsText() }} · {{ bytesText() }}</span>
            </p>
          </div>
        }
        @case ('saved') {
          <p class="done" role="status">
            <span class="material-symbols-outlined" aria-hidden="true">task_alt</span>
            Saved {{ state().fileName }}: {{ rowsText() }}, {{ bytesText() }}.
          </p>
        }
        @case ('failed') {
          <p class="problems" role="alert"><span class="material-symbols-outlined" aria-hidden="true">error</span> {{ state().message }}</p>
        }
        @case ('cancelled') {
          <p class="hint" role="status">{{ state().message }}</p>
        }
      }
    </section>
  `,
  styleUrl: './workbench-forms.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class ResidualExport {
  protected readonly download = inject(ResidualDownload);
  readonly cohorts = input<CohortOption[]>([]);
  protected readonly picked = signal<PickedEstimator[]>([]);
  protected readonly window = signal<StudyWindow | null>(DEFAULT_WINDOW);
  protected readonly format = signal<ExportFormat>('csv');
  protected readonly problem = signal<string | null>(null);
  protected readonly state = this.download.state;
  /** Share done: by bytes when the size is known, else by rows against the service's estimate. */
  protected readonly percent = computed(() => {
    const s = this.state();
    if (s.totalBytes) return Math.min(100, (100 * s.bytes) / s.totalBytes);
    if (s.expectedRows) return Math.min(100, (100 * s.rows) / s.expectedRows);
    return null;
  });
  protected readonly rowsText = computed(() => {
    const { rows, expectedRows, phase } = this.state();
    const of = expectedRows && phase === 'receiving' ? ` of about ${expectedRows.toLocaleString('en-GB')}` : '';
    return `${rows.toLocaleString('en-GB')}${of} ${rows === 1 && !of ? 'row' : 'rows'}`;
  });
  protected readonly bytesText = computed(() => {
    const s = this.state();
    return s.totalBytes ? `${formatBytes(s.bytes)} of ${formatBytes(s.totalBytes)}` : formatBytes(s.bytes);
  });

  protected async downloadResiduals(): Promise<void> {
    const w = this.window();
    if (!this.picked().length) return this.problem.set('Choose at least one estimator.');
    if (!w) return this.problem.set('Fix the custom window, or pick a preset.');
    this.problem.set(null);
    const { from, to } = windowEnds(w);
    await this.download.download({ estimatorIds: this.picked().map((e) => e.id), from, to, format: this.format() });
  }

  protected cancelDownload(): void {
    this.download.cancel();
  }
}
