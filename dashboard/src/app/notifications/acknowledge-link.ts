import { ChangeDetectionStrategy, Component, computed, inject, input, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { RouterLink } from '@angular/router';
import { catchError, firstValueFrom, map, of, startWith, switchMap } from 'rxjs';
import type { AcknowledgeLinkInfo, AcknowledgeLinkResult } from '../../../../shared/src/api/api-types';
import { SeverityBadge } from '../alerts/severity-badge';
import { ruleWords } from '../alerts/severity-look';
import { WhitecapMark } from '../shell/whitecap-mark';
import { formatDateTime } from '../time/age';
import { linkFailureWords, linkRefusalOf, linkRefusalOfInfo, refusalWords, type LinkRefusal } from './acknowledge-outcome';
import { NotificationsApi } from './notifications-api';

type LinkState =
  | { kind: 'loading' }
  | { kind: 'info'; info: AcknowledgeLinkInfo }
  | { kind: 'refused'; refusal: LinkRefusal }
  | { kind: 'failed'; message: string };

/**
 * The page an e-mailed acknowledge link opens, without signing in. It shows the alert and
 * acknowledges only when the button is pressed (mail scanners open links on their own).
 */
@Component({
  selector: 'wc-acknowledge-link',
  imports: [RouterLink, MatButtonModule, MatProgressBarModule, SeverityBadge, WhitecapMark],
  templateUrl: './acknowledge-link.html',
  styleUrl: './acknowledge-link.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class AcknowledgeLink {
  private readonly api = inject(NotificationsApi);
  /** The route's :token. */
  readonly token = input.required<string>();
  protected readonly ruleWords = ruleWords;
  protected readonly formatDateTime = formatDateTime;

  protected readonly link = toSignal(
    toObservable(this.token).pipe(
      switchMap((token) =>
        this.api.acknowledgeLink(token).pipe(
          map((info): LinkState => ({ kind: 'info', info })),
          catchError((err: unknown) => {
            const refusal = linkRefusalOf(err);
            return of<LinkState>(refusal ? { kind: 'refused', refusal } : { kind: 'failed', message: linkFailureWords(err) });
          }),
          startWith<LinkState>({ kind: 'loading' }),
        ),
      ),
    ),
    { initialValue: { kind: 'loading' } as LinkState },
  );
  protected readonly info = computed(() => {
    const l = this.link();
    return l.kind === 'info' ? l.info : null;
  });

  protected readonly busy = signal(false);
  protected readonly result = signal<AcknowledgeLinkResult | null>(null);
  /** Refused when pressed (someone else was quicker, it expired meanwhile…). */
  protected readonly pressRefusal = signal<LinkRefusal | null>(null);
  protected readonly pressError = signal<string | null>(null);

  /** Why the link cannot be used, in words; null while it can. */
  protected readonly refusal = computed(() => {
    const l = this.link();
    const info = this.info();
    const refusal = this.pressRefusal() ?? (l.kind === 'refused' ? l.refusal : info ? linkRefusalOfInfo(info) : null);
    if (!refusal || this.result()) return null;
    return refusalWords(refusal, { expiresAt: info?.expiresAt, state: info?.alert.state, formatTime: formatDateTime });
  });

  protected async acknowledgeAlert(): Promise<void> {
    this.busy.set(true);
    this.pressError.set(null);
    try {
      this.result.set(await firstValueFrom(this.api.acknowledgeByLink(this.token())));
    } catch (err) {
      const refusal = linkRefusalOf(err);
      if (refusal) this.pressRefusal.set(refusal);
      else this.pressError.set(linkFailureWords(err));
    } finally {
      this.busy.set(false);
    }
  }
}
