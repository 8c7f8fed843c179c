import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatButtonToggleModule } from '@angular/material/button-toggle';
import { MatPaginatorModule, type PageEvent } from '@angular/material/paginator';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { MatTableModule } from '@angular/material/table';
import { RouterLink } from '@angular/router';
import { Subject, combineLatest, firstValueFrom, interval, merge, startWith, switchMap } from 'rxjs';
import type { Delivery, DeliveryList, DeliveryStatus as Status } from '../../../../shared/src/api/api-types';
import { Session } from '../auth/session';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { problemMessage } from '../feedback/problem-message';
import { formatDateTime } from '../time/age';
import { CHANNEL_WORDS } from './delivery-look';
import { DeliveryStatus } from './delivery-status';
import { NotificationsApi, type DeliveryQuery } from './notifications-api';

/** Every e-mail and webhook call with its outcome; failed ones can be retried by administrators. */
@Component({
  selector: 'wc-delivery-log',
  imports: [RouterLink, MatTableModule, MatPaginatorModule, MatButtonModule, MatButtonToggleModule, MatProgressBarModule, Notice, DeliveryStatus],
  templateUrl: './delivery-log.html',
  styleUrl: './notifications-section.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class DeliveryLog {
  private readonly api = inject(NotificationsApi);
  private readonly session = inject(Session);
  protected readonly canRetry = computed(() => this.session.can('administer'));
  protected readonly formatDateTime = formatDateTime;
  protected readonly columns = ['status', 'channel', 'target', 'subject', 'attempts', 'lastError', 'times', 'actions'];

  protected readonly channel = signal<Delivery['channel'] | ''>('');
  protected readonly status = signal<Status | ''>('');
  protected readonly page = signal({ pageIndex: 0, pageSize: 25 });
  private readonly query = computed((): DeliveryQuery => ({ channel: this.channel(), status: this.status(), ...this.page() }));
  private readonly reload$ = new Subject<void>();

  protected readonly deliveries = toSignal(
    combineLatest([toObservable(this.query), merge(this.reload$, interval(30_000)).pipe(startWith(null))]).pipe(
      switchMap(([q]) => loadSteps(this.api.deliveries(q), 'It retries every 30 seconds.')),
      foldLoad(),
    ),
    { initialValue: initialLoad<DeliveryList>() },
  );
  protected readonly rows = computed(() => this.deliveries().value?.items ?? []);
  protected readonly emptyText = computed(() =>
    this.channel() || this.status() ? 'No delivery matches these filters.' : 'Nothing has been sent yet.',
  );

  protected readonly retrying = signal<number | null>(null);
  protected readonly actionError = signal<string | null>(null);
  protected readonly done = signal<string | null>(null);

  protected channelLook(d: Delivery): { word: string; icon: string } {
    return CHANNEL_WORDS[d.channel] ?? { word: d.channel, icon: 'outgoing_mail' };
  }

  protected filterChannel(channel: Delivery['channel'] | ''): void {
    this.channel.set(channel);
    this.firstPage();
  }

  protected filterStatus(status: Status | ''): void {
    this.status.set(status);
    this.firstPage();
  }

  protected pageTo(event: PageEvent): void {
    this.page.set({ pageIndex: event.pageIndex, pageSize: event.pageSize });
  }

  protected retry(): void {
    this.reload$.next();
  }

  protected async retryDelivery(d: Delivery): Promise<void> {
    this.retrying.set(d.id);
    this.actionError.set(null);
    this.done.set(null);
    try {
      const after = await firstValueFrom(this.api.retryDelivery(d.id));
      this.done.set(
        after.status === 'sent'
          ? `Delivered to ${after.target} on this try.`
          : after.status === 'failed'
            ? `Tried again; it failed: ${after.lastError ?? 'no reason given'}.`
            : `Queued to be sent again to ${after.target}.`,
      );
    } catch (err) {
      this.actionError.set(problemMessage(err));
    } finally {
      this.retrying.set(null);
      this.reload$.next();
    }
  }

  private firstPage(): void {
    this.page.update((p) => (p.pageIndex === 0 ? p : { ...p, pageIndex: 0 }));
  }
}
