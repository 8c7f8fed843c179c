import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatSlideToggleModule } from '@angular/material/slide-toggle';
import { Subject, firstValueFrom, startWith, switchMap } from 'rxjs';
import type { AlertSeverity, NotificationRule } from '../../../../shared/src/api/api-types';
import { SeverityBadge } from '../alerts/severity-badge';
import { SEVERITIES } from '../alerts/severity-look';
import { Session } from '../auth/session';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { problemMessage } from '../feedback/problem-message';
import { NotificationsApi } from './notifications-api';
import { MAX_HANDOFF_MINUTES, handoffWords, quietHoursWords, ruleChange, ruleDraft, type RuleDraft } from './rule-draft';

/** Per severity: whether it pages, when it hands off, its quiet hours. Administrators edit each row in place. */
@Component({
  selector: 'wc-notification-rules',
  imports: [MatButtonModule, MatSlideToggleModule, SeverityBadge, Notice],
  templateUrl: './notification-rules.html',
  styleUrl: './notifications-section.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class NotificationRules {
  private readonly api = inject(NotificationsApi);
  private readonly session = inject(Session);
  protected readonly canEdit = computed(() => this.session.can('administer'));
  protected readonly maxMinutes = MAX_HANDOFF_MINUTES;
  protected readonly quietHoursWords = quietHoursWords;
  protected readonly handoffWords = handoffWords;

  private readonly reload$ = new Subject<void>();
  protected readonly rules = toSignal(
    this.reload$.pipe(
      startWith(null),
      switchMap(() => loadSteps(this.api.rules())),
      foldLoad(),
    ),
    { initialValue: initialLoad<NotificationRule[]>() },
  );
  /** Critical first, as everywhere else. */
  protected readonly rows = computed(() =>
    [...(this.rules().value ?? [])].sort((a, b) => SEVERITIES.indexOf(a.severity) - SEVERITIES.indexOf(b.severity)),
  );
  /** Rows being edited, by severity; a row without an entry shows what the service holds. */
  protected readonly drafts = signal<Partial<Record<AlertSeverity, RuleDraft>>>({});
  protected readonly problems = signal<Partial<Record<AlertSeverity, string>>>({});
  protected readonly saving = signal<AlertSeverity | null>(null);
  protected readonly done = signal<string | null>(null);

  protected draftOf(rule: NotificationRule): RuleDraft {
    return this.drafts()[rule.severity] ?? ruleDraft(rule);
  }

  protected isChanged(rule: NotificationRule): boolean {
    const d = this.drafts()[rule.severity];
    if (!d) return false;
    const { change, problems } = ruleChange(rule, d);
    return problems.length > 0 || Object.keys(change).length > 0;
  }

  protected edit(rule: NotificationRule, field: keyof RuleDraft, value: string | boolean): void {
    this.done.set(null);
    this.drafts.update((all) => ({ ...all, [rule.severity]: { ...this.draftOf(rule), [field]: value } }));
  }

  protected undo(rule: NotificationRule): void {
    this.forget(rule.severity);
  }

  protected retry(): void {
    this.reload$.next();
  }

  protected async saveRule(rule: NotificationRule): Promise<void> {
    const { change, problems } = ruleChange(rule, this.draftOf(rule));
    if (problems.length) {
      this.problems.update((p) => ({ ...p, [rule.severity]: problems.join(' ') }));
      return;
    }
    if (Object.keys(change).length === 0) {
      this.forget(rule.severity);
      return;
    }
    this.saving.set(rule.severity);
    this.problems.update((p) => ({ ...p, [rule.severity]: undefined }));
    try {
      const saved = await firstValueFrom(this.api.updateRule(rule.severity, change));
      this.forget(rule.severity);
      this.done.set(`Rule for ${saved.severity} alerts saved.`);
      this.reload$.next();
    } catch (err) {
      this.problems.update((p) => ({ ...p, [rule.severity]: problemMessage(err) }));
    } finally {
      this.saving.set(null);
    }
  }

  private forget(severity: AlertSeverity): void {
    this.drafts.update((all) => {
      const { [severity]: _gone, ...rest } = all;
      return rest;
    });
    this.problems.update((p) => ({ ...p, [severity]: undefined }));
  }
}
