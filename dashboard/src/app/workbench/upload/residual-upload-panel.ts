import { ChangeDetectionStrategy, Component, computed, inject, input, signal } from '@angular/core';
import type { UploadReport } from '../../../../../shared/src/api/api-types';
import type { CohortOption } from '../cohorts';
import { ResidualUploadSender, sizeProblem } from './residual-upload-sender';

/** "Upload a logged run": a CSV of innovations from a bench run or a test drive, checked row by row on the service. */
@Component({
  selector: 'wc-residual-upload-panel',
  template: `
    <h2 id="upload-title">Upload a logged run</h2>
    <p class="hint">A CSV from a bench run or a test drive: the residual export's columns, or <code>seq,t,nu_1..nu_m</code>. At most 50 MB.</p>
    <form (submit)="$event.preventDefault(); send()" aria-labelledby="upload-title">
      <label>Design revision
        <select [value]="revisionId() ?? ''" (change)="revisionId.set(+$any($event.target).value || null)" [disabled]="busy()">
          <option value="">Choose…</option>
          @for (o of revisions(); track o.revisionId) {
            <option [value]="o.revisionId">{{ o.designKey }} revision {{ o.revision }} ({{ o.status }}, {{ o.measurementDim }} measured)</option>
          }
        </select>
      </label>
      <label>Name <input type="text" maxlength="200" [value]="name()" (input)="name.set($any($event.target).value)" [disabled]="busy()" /></label>
      <label>File <input type="file" accept=".csv,text/csv" (change)="pick($any($event.target).files?.[0] ?? null)" [disabled]="busy()" /></label>
      @if (fileError(); as e) {
        <p class="verdict bad" role="alert">✖ Too large or unusable: {{ e }}</p>
      }
      <button type="submit" [disabled]="!ready()">Upload</button>
    </form>
    @if (busy()) {
      <div class="progress" role="progressbar" aria-label="Upload progress" [attr.aria-valuenow]="percent()" aria-valuemin="0" aria-valuemax="100">
        <div class="bar" [style.width.%]="percent()"></div>
      </div>
      <p>{{ percent() < 100 ? 'Sending ' + percent() + ' %' : 'Checking the rows on the service…' }}</p>
    }
    @if (error(); as e) {
      <p class="verdict bad" role="alert">✖ Upload refused: {{ e }}</p>
    }
    @if (report(); as r) {
      <p class="verdict" [class.bad]="r.rowsRejected > 0" role="status">
        {{ r.rowsRejected ? '▲' : '✔' }} Upload #{{ r.id }}: {{ r.rowsAccepted }} rows accepted, {{ r.rowsRejected }} rejected.
      </p>
      @if (r.rejected.length) {
        <table>
          <caption>First rejected rows{{ r.rowsRejected > r.rejected.length ? ' (' + r.rejected.length + ' of ' + r.rowsRejected + ')' : '' }}</caption>
          <thead><tr><th scope="col">Line</th><th scope="col">Reason</th></tr></thead>
          <tbody>
            @for (x of r.rejected; track x.line) {
              <tr><td>{{ x.line }}</td><td>{{ x.reason }}</td></tr>
            }
          </tbody>
        </table>
      }
    }
  `,
  styles: `
    h2 { margin: 0 0 8px; font: var(--mat-sys-title-large); }
    form { display: flex; flex-direction: column; gap: 8px; max-width: 480px; }
    label { display: flex; flex-direction: column; gap: 2px; }
    .hint { color: var(--mat-sys-on-surface-variant); }
    .progress { height: 8px; border-radius: 4px; background: var(--mat-sys-surface-container-high); overflow: hidden; margin-top: 8px; }
    .bar { height: 100%; background: var(--mat-sys-primary); }
    .verdict { font-weight: 500; color: var(--wc-ok, inherit); }
    .verdict.bad { color: var(--wc-bad, var(--mat-sys-error)); }
    table { border-collapse: collapse; margin-top: 8px; }
    td, th { padding: 2px 8px; text-align: left; border-bottom: 1px solid var(--mat-sys-outline-variant); }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class ResidualUploadPanel {
  private readonly sender = inject(ResidualUploadSender);
  readonly cohorts = input<CohortOption[]>([]);

  protected readonly revisions = computed(() => this.cohorts());
  protected readonly revisionId = signal<number | null>(null);
  protected readonly name = signal('');
  protected readonly file = signal<File | null>(null);
  protected readonly fileError = signal<string | null>(null);
  protected readonly busy = signal(false);
  protected readonly percent = signal(0);
  protected readonly error = signal<string | null>(null);
  protected readonly report = signal<UploadReport | null>(null);
  protected readonly ready = computed(() => !this.busy() && !!this.file() && !this.fileError() && this.revisionId() !== null && this.name().trim() !== '');

  protected pick(file: File | null): void {
    this.file.set(file);
    this.fileError.set(file ? sizeProblem(file) : null);
    if (file && !this.name().trim()) this.name.set(file.name.replace(/\.csv$/i, ''));
  }

  protected async send(): Promise<void> {
    const file = this.file();
    const revisionId = this.revisionId();
    if (!file || revisionId === null || !this.ready()) return;
    this.busy.set(true);
    this.percent.set(0);
    this.error.set(null);
    this.report.set(null);
    try {
      this.report.set(await this.sender.send(file, revisionId, this.name().trim(), (f) => this.percent.set(Math.round(f * 100))));
    } catch (err) {
      this.error.set((err as Error).message);
    } finally {
      this.busy.set(false);
    }
  }
}
