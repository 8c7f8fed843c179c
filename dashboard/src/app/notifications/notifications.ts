import { ChangeDetectionStrategy, Component, computed, inject } from '@angular/core';
import { RouterLink } from '@angular/router';
import { Session } from '../auth/session';
import { DeliveryLog } from './delivery-log';
import { NotificationRules } from './notification-rules';
import { WebhookEndpoints } from './webhook-endpoints';

/**
 * Notifications: which severities page and when they hand off, the signed webhook endpoints
 * (administrators), and the delivery log of every e-mail and webhook call (responders read it).
 */
@Component({
  selector: 'wc-notifications',
  imports: [RouterLink, NotificationRules, WebhookEndpoints, DeliveryLog],
  template: `
    <header class="page-head">
      <h1>Notifications</h1>
      <p class="sub">
        How alerts reach people: who is paged is set by the <a routerLink="/rota">watch rota</a>; what pages, and when an
        alert is handed off to the next person in line, is set here.
      </p>
    </header>
    <section class="card" aria-labelledby="rules-title">
      <h2 id="rules-title">Notification rules</h2>
      <wc-notification-rules />
    </section>
    @if (canAdminister()) {
      <section class="card" aria-labelledby="webhooks-title">
        <h2 id="webhooks-title">Webhook endpoints</h2>
        <wc-webhook-endpoints />
      </section>
    }
    <section class="card" id="deliveries" aria-labelledby="deliveries-title">
      <h2 id="deliveries-title">Delivery log</h2>
      <wc-delivery-log />
    </section>
  `,
  styles: `
    :host { display: flex; flex-direction: column; gap: 16px; }
    h1 { margin: 0; font: var(--mat-sys-headline-medium); }
    .sub { margin: 4px 0 0; color: var(--mat-sys-on-surface-variant); max-width: 110ch; }
    a { color: var(--mat-sys-primary); font-weight: 500; }
    .card {
      padding: 16px;
      border-radius: 12px;
      border: 1px solid var(--mat-sys-outline-variant);
      background: var(--mat-sys-surface-container-low);
      min-width: 0;
    }
    h2 { margin: 0 0 8px; font: var(--mat-sys-title-large); }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class Notifications {
  private readonly session = inject(Session);
  protected readonly canAdminister = computed(() => this.session.can('administer'));
}
