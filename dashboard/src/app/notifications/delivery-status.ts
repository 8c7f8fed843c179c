import { ChangeDetectionStrategy, Component, computed, input } from '@angular/core';
import type { Delivery } from '../../../../shared/src/api/api-types';
import { deliveryLook } from './delivery-look';

/** A delivery's outcome as colour, icon and word together. */
@Component({
  selector: 'wc-delivery-status',
  template: `<span class="material-symbols-outlined" aria-hidden="true">{{ look().icon }}</span><span class="word">{{ look().word }}</span>`,
  styles: `
    :host {
      display: inline-flex; align-items: center; gap: 4px;
      padding: 1px 10px 1px 6px; border-radius: 12px;
      border: 1px solid color-mix(in srgb, var(--wc-delivery-colour) 55%, transparent);
      background: color-mix(in srgb, var(--wc-delivery-colour) 12%, transparent);
      font-size: 0.85rem; white-space: nowrap;
    }
    .material-symbols-outlined { font-size: 16px; color: var(--wc-delivery-colour); }
    .word { font-weight: 500; }
  `,
  host: { '[style.--wc-delivery-colour]': 'look().colour', '[attr.data-status]': 'delivery().status' },
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class DeliveryStatus {
  readonly delivery = input.required<Pick<Delivery, 'status' | 'attempts'>>();
  protected readonly look = computed(() => deliveryLook(this.delivery()));
}
