import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { Router, RouterLink } from '@angular/router';
import { Subject, firstValueFrom, startWith, switchMap } from 'rxjs';
import type { DesignSummary } from '../../../../../shared/src/api/api-types';
import { foldLoad, initialLoad, loadSteps } from '../../feedback/load-state';
import { Notice } from '../../feedback/notice';
import { problemIssues } from '../../feedback/problem-issues';
import { problemMessage } from '../../feedback/problem-message';
import { RevisionStatusMark } from './revision-status';
import { RevisionsApi } from './revisions-api';

/** A design's newest revision (highest number) with its status. */
function newestRevision(d: DesignSummary): { revision: number; status: DesignSummary['revisions'][number]['status'] } | null {
  const newest = [...d.revisions].sort((a, b) => b.revision - a.revision)[0];
  return newest ? { revision: newest.revision, status: newest.status } : null;
}

/** Every design with its revisions at a glance, each opening its own page; a new design. */
@Component({
  selector: 'wc-design-registry',
  imports: [RouterLink, MatButtonModule, MatFormFieldModule, MatInputModule, MatProgressBarModule, Notice, RevisionStatusMark],
  template: `
    <nav class="crumbs" aria-label="Breadcrumb">
      <a routerLink="/workbench">Workbench</a>
      <span aria-hidden="true">›</span>
      <span aria-current="page">Design registry</span>
    </nav>
    <header class="head">
      <h1>Design registry</h1>
      <p class="sub">
        Each design is an estimator's model and tuning; its revisions are numbered, and estimators run one of them. Open a design
        to see its revisions or to make a new one.
      </p>
    </header>
    @if (designs().error; as e) {
      <wc-notice kind="error" [message]="e" retryLabel="Retry now" (retry)="reload()" />
    }
    <section class="card" aria-labelledby="designs-title">
      <h2 id="designs-title">Designs</h2>
      @if (designs().value) {
        <div class="table-wrap">
          <table class="list" aria-label="Designs">
            <thead>
              <tr>
                <th scope="col">Design</th>
                <th scope="col">Key</th>
                <th scope="col" class="num">Revisions</th>
                <th scope="col">Newest</th>
                <th scope="col" class="num">Estimators</th>
              </tr>
            </thead>
            <tbody>
              @for (d of rows(); track d.id) {
                <tr [attr.data-design]="d.key">
                  <td><a [routerLink]="['/workbench/designs', d.id]">{{ d.name }}</a></td>
                  <td><code>{{ d.key }}</code></td>
                  <td class="num">{{ d.revisions.length }}</td>
                  <td>
                    @if (d.newest; as n) {
                      rev {{ n.revision }} <wc-revision-status [status]="n.status" />
                    } @else {
                      <span class="secondary">none yet</span>
                    }
                  </td>
                  <td class="num">{{ d.estimators }}</td>
                </tr>
              }
            </tbody>
          </table>
        </div>
      } @else if (!designs().error) {
        <wc-notice kind="loading" message="Loading the designs…" />
      }
    </section>

    <section class="card" aria-labelledby="new-design-title">
      <h2 id="new-design-title">New design</h2>
      <p class="hint">A new estimator model starts here; its first revision is made on its page.</p>
      <form class="new-design" (submit)="createDesign($event)" novalidate>
        <mat-form-field appearance="outline">
          <mat-label>Key</mat-label>
          <input matInput maxlength="64" [value]="key()" (input)="key.set($any($event.target).value)" placeholder="e.g. tractor-heading" />
          <mat-hint>Lower-case words joined by hyphens</mat-hint>
        </mat-form-field>
        <mat-form-field appearance="outline">
          <mat-label>Name</mat-label>
          <input matInput maxlength="200" [value]="name()" (input)="name.set($any($event.target).value)" />
        </mat-form-field>
        <mat-form-field appearance="outline" class="wide">
          <mat-label>Description (optional)</mat-label>
          <input matInput maxlength="2000" [value]="description()" (input)="description.set($any($event.target).value)" />
        </mat-form-field>
        <div class="buttons">
          <button mat-stroked-button type="submit" [disabled]="creating()">Create design</button>
          @if (creating()) {
            <mat-progress-bar class="inline-progress" mode="indeterminate" aria-label="Creating the design" />
          }
        </div>
      </form>
      @if (createProblems().length) {
        <div class="problems" role="alert">
          <span class="material-symbols-outlined" aria-hidden="true">error</span>
          <ul>
            @for (p of createProblems(); track $index) {
              <li>{{ p }}</li>
            }
          </ul>
        </div>
      }
    </section>
  `,
  styleUrl: './revisions.scss',
  styles: `
    .new-design { display: flex; flex-wrap: wrap; gap: 8px 16px; align-items: flex-start; }
    .new-design .wide { flex: 1 1 360px; }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class DesignRegistry {
  private readonly api = inject(RevisionsApi);
  private readonly router = inject(Router);
  private readonly reload$ = new Subject<void>();
  protected readonly designs = toSignal(
    this.reload$.pipe(
      startWith(null),
      switchMap(() => loadSteps(this.api.designs())),
      foldLoad(),
    ),
    { initialValue: initialLoad<{ items: DesignSummary[] }>() },
  );
  protected readonly rows = computed(() =>
    (this.designs().value?.items ?? []).map((d) => ({ ...d, newest: newestRevision(d), estimators: d.revisions.reduce((s, r) => s + r.estimators, 0) })),
  );

  protected readonly key = signal('');
  protected readonly name = signal('');
  protected readonly description = signal('');
  protected readonly creating = signal(false);
  protected readonly createProblems = signal<string[]>([]);

  protected reload(): void {
    this.reload$.next();
  }

  protected async createDesign(event: Event): Promise<void> {
    event.preventDefault();
    if (this.creating()) return;
    this.creating.set(true);
    this.createProblems.set([]);
    try {
      const d = await firstValueFrom(this.api.createDesign({ key: this.key().trim(), name: this.name().trim(), description: this.description().trim() }));
      await this.router.navigate(['/workbench/designs', d.id]);
    } catch (err) {
      const message = problemMessage(err);
      const fields = problemIssues(err).map((i) => (i.path ? `${i.path}: ${i.message}` : i.message)).filter((f) => !message.includes(f));
      this.createProblems.set([message, ...fields]);
    } finally {
      this.creating.set(false);
    }
  }
}
