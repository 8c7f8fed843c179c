import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatDialog } from '@angular/material/dialog';
import { RouterLink } from '@angular/router';
import { EMPTY, Subject, firstValueFrom, forkJoin, interval, merge, startWith, switchMap } from 'rxjs';
import type { RotaSummary, Site } from '../../../../shared/src/api/api-types';
import { ConfirmDialog, type ConfirmData } from '../admin/confirm-dialog';
import { Session } from '../auth/session';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { problemMessage } from '../feedback/problem-message';
import { RotaApi, type RotaPerson } from './rota-api';
import { RotaCard } from './rota-card';
import { RotaEditor } from './rota-editor';
import { viewerTimeZone } from './zoned-time';

/** The watch rota: who is on watch now and next, per rota; administrators also create, change and delete rotas. */
@Component({
  selector: 'wc-watch-rota',
  imports: [RouterLink, MatButtonModule, Notice, RotaCard, RotaEditor],
  template: `
    <header class="page-head">
      <h1>Watch rota</h1>
      <p class="sub">
        Who is on watch for the whole fleet and for each site, who takes over next, and who is paged when an alert is not
        acknowledged in time. Times are shown in each rota's own time zone, with yours ({{ myZone }}) beside them where
        your clock reads differently.
      </p>
    </header>

    @if (canEdit()) {
      <div class="toolbar">
        <button mat-flat-button type="button" (click)="startNewRota()" [disabled]="creating()">
          <span class="material-symbols-outlined" aria-hidden="true">add</span> New rota
        </button>
        @if (helpers().error; as e) {
          <wc-notice kind="error" [message]="'People and sites for the pickers could not be loaded. ' + e" retryLabel="Retry now" (retry)="retryHelpers()" />
        }
      </div>
    }
    @if (done(); as d) {
      <p class="done" role="status">{{ d }}</p>
    }
    @if (actionError(); as e) {
      <p class="error" role="alert">{{ e }}</p>
    }
    @if (creating()) {
      <wc-rota-editor [people]="people()" [sites]="sites()" (saved)="rotaSaved($event, 'created')" (cancelled)="creating.set(false)" />
    }

    @if (rotas().error; as e) {
      <wc-notice kind="error" [message]="e" retryLabel="Retry now" (retry)="reload()" />
    }
    @if (rotas().value; as list) {
      @for (r of list; track r.id) {
        @if (editingId() === r.id) {
          <wc-rota-editor [rota]="r" [people]="people()" [sites]="sites()" (saved)="rotaSaved($event, 'saved')" (cancelled)="editingId.set(null)" />
        } @else {
          <wc-rota-card [rota]="r" [canEdit]="canEdit()" [people]="people()" (edit)="editRota($event)" (remove)="deleteRota($event)" (changed)="rotaChanged()" />
        }
      } @empty {
        <wc-notice kind="empty" [message]="canEdit() ? 'No watch rota yet: alerts page nobody. Create one with New rota.' : 'No watch rota yet: alerts page nobody. Ask an administrator to set one up.'" />
      }
    } @else if (!rotas().error) {
      <wc-notice kind="loading" message="Loading the watch rota…" />
    }

    @if (canSeeDeliveries()) {
      <p class="more">
        <span class="material-symbols-outlined" aria-hidden="true">forward_to_inbox</span>
        What was sent to whom, and whether it arrived: <a routerLink="/notifications">the delivery log</a>.
      </p>
    }
  `,
  styles: `
    :host { display: flex; flex-direction: column; gap: 16px; }
    h1 { margin: 0; font: var(--mat-sys-headline-medium); }
    .sub { margin: 4px 0 0; color: var(--mat-sys-on-surface-variant); max-width: 110ch; }
    .toolbar { display: flex; flex-wrap: wrap; gap: 12px; align-items: center; }
    .more { display: flex; align-items: center; gap: 8px; margin: 0; color: var(--mat-sys-on-surface-variant); }
    a { color: var(--mat-sys-primary); font-weight: 500; }
    .error, .done { margin: 0; padding: 8px 12px; border-left: 4px solid var(--wc-magenta); background: color-mix(in srgb, var(--wc-magenta) 10%, transparent); }
    .done { border-left-color: var(--wc-teal-500); background: color-mix(in srgb, var(--wc-teal-500) 10%, transparent); }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class WatchRota {
  private readonly api = inject(RotaApi);
  private readonly session = inject(Session);
  private readonly dialog = inject(MatDialog);
  protected readonly myZone = viewerTimeZone();
  protected readonly canEdit = computed(() => this.session.can('administer'));
  protected readonly canSeeDeliveries = computed(() => this.session.can('respond'));

  private readonly reload$ = new Subject<void>();
  /** Reloaded every minute, so "on watch now" follows the handovers. */
  protected readonly rotas = toSignal(
    merge(this.reload$, interval(60_000)).pipe(
      startWith(null),
      switchMap(() => loadSteps(this.api.rotas(), 'It retries every minute.')),
      foldLoad(),
    ),
    { initialValue: initialLoad<RotaSummary[]>() },
  );

  private readonly helpersReload$ = new Subject<void>();
  /** People and sites for the pickers: administrators only. */
  protected readonly helpers = toSignal(
    this.helpersReload$.pipe(
      startWith(null),
      switchMap(() => (this.canEdit() ? loadSteps(forkJoin({ people: this.api.people(), sites: this.api.sites() })) : EMPTY)),
      foldLoad(),
    ),
    { initialValue: { ...initialLoad<{ people: RotaPerson[]; sites: Site[] }>(), loading: false } },
  );
  protected readonly people = computed(() => this.helpers().value?.people ?? []);
  protected readonly sites = computed(() => this.helpers().value?.sites ?? []);

  protected readonly creating = signal(false);
  protected readonly editingId = signal<number | null>(null);
  protected readonly done = signal<string | null>(null);
  protected readonly actionError = signal<string | null>(null);

  protected reload(): void {
    this.reload$.next();
  }

  protected retryHelpers(): void {
    this.helpersReload$.next();
  }

  protected startNewRota(): void {
    this.editingId.set(null);
    this.done.set(null);
    this.creating.set(true);
  }

  protected editRota(rota: RotaSummary): void {
    this.creating.set(false);
    this.done.set(null);
    this.editingId.set(rota.id);
  }

  protected rotaSaved(rota: RotaSummary, how: 'created' | 'saved'): void {
    this.creating.set(false);
    this.editingId.set(null);
    this.done.set(how === 'created' ? `Rota ${rota.name} created.` : `Rota ${rota.name} saved.`);
    this.reload();
  }

  protected rotaChanged(): void {
    this.reload();
  }

  protected async deleteRota(rota: RotaSummary): Promise<void> {
    const sure = await this.confirm({
      title: `Delete the rota ${rota.name}?`,
      message: `Its shifts, backups and overrides go with it. Alerts in its scope (${rota.scope.kind === 'fleet' ? 'the whole fleet' : rota.scope.siteName}) page nobody from this rota afterwards.`,
      confirm: 'Delete rota',
    });
    if (!sure) return;
    this.actionError.set(null);
    this.done.set(null);
    try {
      await firstValueFrom(this.api.remove(rota.id));
      this.done.set(`Rota ${rota.name} deleted.`);
      this.reload();
    } catch (err) {
      this.actionError.set(problemMessage(err));
    }
  }

  private confirm(data: ConfirmData): Promise<boolean> {
    return firstValueFrom(this.dialog.open<ConfirmDialog, ConfirmData, boolean>(ConfirmDialog, { data }).afterClosed()).then((ok) => ok === true);
  }
}
