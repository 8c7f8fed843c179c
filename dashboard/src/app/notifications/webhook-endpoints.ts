import { Clipboard } from '@angular/cdk/clipboard';
import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { AbstractControl, FormBuilder, ReactiveFormsModule, ValidationErrors, Validators } from '@angular/forms';
import { MatButtonModule } from '@angular/material/button';
import { MatDialog } from '@angular/material/dialog';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatSlideToggleModule } from '@angular/material/slide-toggle';
import { MatTableModule } from '@angular/material/table';
import { Subject, firstValueFrom, startWith, switchMap } from 'rxjs';
import type { WebhookEndpoint, WebhookEndpointWithSecret } from '../../../../shared/src/api/api-types';
import { ConfirmDialog, type ConfirmData } from '../admin/confirm-dialog';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { problemIssues } from '../feedback/problem-issues';
import { problemMessage } from '../feedback/problem-message';
import { formatDateTime } from '../time/age';
import { NotificationsApi } from './notifications-api';
import { webhookUrlProblem } from './webhook-url';

function webhookUrl(control: AbstractControl<string>): ValidationErrors | null {
  const problem = webhookUrlProblem(control.value ?? '');
  return problem ? { webhookUrl: problem } : null;
}

/** Webhook endpoints: register one (its signing secret shown once), pause or resume, delete. */
@Component({
  selector: 'wc-webhook-endpoints',
  imports: [ReactiveFormsModule, MatTableModule, MatFormFieldModule, MatInputModule, MatButtonModule, MatSlideToggleModule, Notice],
  templateUrl: './webhook-endpoints.html',
  styleUrl: './notifications-section.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class WebhookEndpoints {
  private readonly api = inject(NotificationsApi);
  private readonly fb = inject(FormBuilder).nonNullable;
  private readonly dialog = inject(MatDialog);
  private readonly clipboard = inject(Clipboard);
  protected readonly formatDateTime = formatDateTime;
  protected readonly columns = ['url', 'active', 'secret', 'createdAt', 'actions'];

  private readonly reload$ = new Subject<void>();
  protected readonly endpoints = toSignal(
    this.reload$.pipe(
      startWith(null),
      switchMap(() => loadSteps(this.api.webhooks())),
      foldLoad(),
    ),
    { initialValue: initialLoad<WebhookEndpoint[]>() },
  );
  protected readonly rows = computed(() => this.endpoints().value ?? []);

  protected readonly form = this.fb.group({
    url: ['', [webhookUrl, Validators.maxLength(2000)]],
    description: ['', [Validators.maxLength(200)]],
  });
  protected readonly registering = signal(false);
  protected readonly registerError = signal<string | null>(null);
  /** The endpoint just registered, with its secret: shown until dismissed, never again. */
  protected readonly justRegistered = signal<WebhookEndpointWithSecret | null>(null);
  protected readonly copied = signal(false);

  protected readonly busyId = signal<number | null>(null);
  protected readonly actionError = signal<string | null>(null);
  protected readonly done = signal<string | null>(null);

  protected retry(): void {
    this.reload$.next();
  }

  protected async registerEndpoint(): Promise<void> {
    if (this.form.invalid) {
      this.form.markAllAsTouched();
      return;
    }
    this.registering.set(true);
    this.registerError.set(null);
    this.done.set(null);
    try {
      const v = this.form.getRawValue();
      const created = await firstValueFrom(this.api.registerWebhook({ url: v.url.trim(), description: v.description.trim() }));
      this.form.reset();
      this.copied.set(false);
      this.justRegistered.set(created);
      this.reload$.next();
    } catch (err) {
      const fields = problemIssues(err).map((i) => i.message);
      this.registerError.set([problemMessage(err), ...fields.filter((f) => !problemMessage(err).includes(f))].join(' '));
    } finally {
      this.registering.set(false);
    }
  }

  protected copySecret(secret: string): void {
    this.copied.set(this.clipboard.copy(secret));
  }

  protected forgetSecret(): void {
    this.justRegistered.set(null);
    this.copied.set(false);
  }

  protected async setActive(endpoint: WebhookEndpoint, active: boolean): Promise<void> {
    await this.run(endpoint, async () => {
      await firstValueFrom(this.api.updateWebhook(endpoint.id, { active }));
      return active ? `Calls to ${endpoint.url} resumed.` : `Calls to ${endpoint.url} paused; events meanwhile are not sent to it.`;
    });
  }

  protected async deleteEndpoint(endpoint: WebhookEndpoint): Promise<void> {
    const data: ConfirmData = {
      title: 'Delete this webhook endpoint?',
      message: `${endpoint.url} will receive no more alert events. Its delivery records stay in the log.`,
      confirm: 'Delete endpoint',
    };
    const sure = await firstValueFrom(this.dialog.open<ConfirmDialog, ConfirmData, boolean>(ConfirmDialog, { data }).afterClosed());
    if (sure !== true) return;
    await this.run(endpoint, async () => {
      await firstValueFrom(this.api.deleteWebhook(endpoint.id));
      if (this.justRegistered()?.id === endpoint.id) this.forgetSecret();
      return `Endpoint ${endpoint.url} deleted.`;
    });
  }

  private async run(endpoint: WebhookEndpoint, action: () => Promise<string>): Promise<void> {
    this.busyId.set(endpoint.id);
    this.actionError.set(null);
    this.done.set(null);
    try {
      this.done.set(await action());
    } catch (err) {
      this.actionError.set(problemMessage(err));
    } finally {
      this.busyId.set(null);
      this.reload$.next();
    }
  }
}
