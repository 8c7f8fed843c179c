import { ChangeDetectionStrategy, Component, computed, inject, input, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { RouterLink } from '@angular/router';
import { Observable, Subject, auditTime, filter, firstValueFrom, map, merge, startWith, switchMap } from 'rxjs';
import type { AlertDetail as AlertDetailData, AlertEvent } from '../../../../shared/src/api/api-types';
import { Session } from '../auth/session';
import { AdvisoryNote } from '../estimator/advisory-note';
import { foldLoad, initialLoad, loadSteps, type LoadStep } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { problemMessage } from '../feedback/problem-message';
import { LiveEvents } from '../live/live-events';
import { ageOf, formatAge, formatDateTime } from '../time/age';
import { TickingClock } from '../time/ticking-clock';
import { AlertsApi } from './alerts-api';
import { evidenceLines } from './evidence';
import { SeverityBadge } from './severity-badge';
import { STATE_WORD, ruleWords } from './severity-look';

const EVENT_LOOK: Record<string, { icon: string; words: string }> = {
  opened: { icon: 'notification_important', words: 'Opened' },
  cleared: { icon: 'check_circle', words: 'Condition cleared' },
  acknowledged: { icon: 'front_hand', words: 'Acknowledged' },
  note: { icon: 'sticky_note_2', words: 'Note' },
  resolved: { icon: 'task_alt', words: 'Resolved' },
  handoff: { icon: 'switch_account', words: 'Handed off' },
};

/** One alert: what fired and why in words and numbers, who did what when, and (for responders) the actions. */
@Component({
  selector: 'wc-alert-detail',
  imports: [RouterLink, MatButtonModule, MatFormFieldModule, MatInputModule, MatProgressBarModule, SeverityBadge, Notice, AdvisoryNote],
  templateUrl: './alert-detail.html',
  styleUrl: './alert-detail.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class AlertDetail {
  private readonly api = inject(AlertsApi);
  private readonly session = inject(Session);
  private readonly live = inject(LiveEvents);
  private readonly clock = inject(TickingClock);

  /** The route's :id. */
  readonly id = input.required<string>();
  protected readonly alertId = computed(() => Number(this.id()));
  protected readonly canRespond = computed(() => this.session.can('respond'));
  protected readonly role = this.session.role;
  protected readonly stateWord = STATE_WORD;
  protected readonly ruleWords = ruleWords;
  protected readonly formatDateTime = formatDateTime;

  private readonly retry$ = new Subject<void>();
  /** Answers of the actions taken here (each is the alert as it now stands). */
  private readonly fresh$ = new Subject<AlertDetailData>();

  protected readonly detail = toSignal(
    toObservable(this.alertId).pipe(
      switchMap((id) =>
        merge(
          merge(this.live.alerts$.pipe(filter((a) => a.alertId === id), auditTime(500)), this.retry$).pipe(
            startWith(null),
            switchMap(() => loadSteps(this.api.detail(id))),
          ),
          this.fresh$.pipe(
            filter((d) => d.id === id),
            map((value): LoadStep<AlertDetailData> => ({ kind: 'value', value })),
          ),
        ).pipe(foldLoad()),
      ),
    ),
    { initialValue: initialLoad<AlertDetailData>() },
  );
  protected readonly alert = computed(() => {
    const a = this.detail().value;
    return a && a.id === this.alertId() ? a : null;
  });
  protected readonly evidence = computed(() => evidenceLines(this.alert()?.evidence));

  protected readonly note = signal('');
  protected readonly busy = signal(false);
  protected readonly actionError = signal<string | null>(null);
  protected readonly actionDone = signal<string | null>(null);

  protected age(iso: string | null): string {
    return formatAge(ageOf(iso, this.clock.now()));
  }

  protected eventLook(e: AlertEvent) {
    return EVENT_LOOK[e.kind] ?? { icon: 'history', words: e.kind };
  }

  protected retry(): void {
    this.retry$.next();
  }

  protected acknowledgeAlert(): Promise<void> {
    return this.act('Acknowledged.', (id) => this.api.acknowledge(id, this.note().trim() || undefined));
  }

  protected addNote(): Promise<void> {
    if (!this.note().trim()) {
      this.actionError.set('Write the note first, then add it.');
      return Promise.resolve();
    }
    return this.act('Note added.', (id) => this.api.addNote(id, this.note().trim()));
  }

  protected resolveAlert(): Promise<void> {
    return this.act('Resolved.', (id) => this.api.resolve(id, this.note().trim() || undefined));
  }

  private async act(done: string, call: (id: number) => Observable<AlertDetailData>): Promise<void> {
    this.busy.set(true);
    this.actionError.set(null);
    this.actionDone.set(null);
    try {
      const updated = await firstValueFrom(call(this.alertId()));
      this.fresh$.next(updated);
      this.note.set('');
      this.actionDone.set(done);
    } catch (err) {
      this.actionError.set(problemMessage(err, 'Try again; if it keeps failing, reload the page.'));
    } finally {
      this.busy.set(false);
    }
  }
}
