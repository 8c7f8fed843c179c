import { ChangeDetectionStrategy, Component, computed, inject, input, output, signal } from '@angular/core';
import { MatButtonModule } from '@angular/material/button';
import { firstValueFrom } from 'rxjs';
import type { RotaOverrideRef, RotaSummary } from '../../../../shared/src/api/api-types';
import { problemMessage } from '../feedback/problem-message';
import { OverrideForm } from './override-form';
import { RotaApi, type RotaPerson } from './rota-api';
import { sortShifts, weekdayWord } from './rota-draft';
import { TwoZoneTime } from './two-zone-time';
import { offsetLabel } from './zoned-time';

/** One watch rota: its scope and zone, who is on watch now and next, the handoff chain, shifts and overrides. */
@Component({
  selector: 'wc-rota-card',
  imports: [MatButtonModule, TwoZoneTime, OverrideForm],
  templateUrl: './rota-card.html',
  styleUrl: './rota-card.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
  host: { '[attr.data-rota-id]': 'rota().id' },
})
export class RotaCard {
  private readonly api = inject(RotaApi);
  readonly rota = input.required<RotaSummary>();
  /** Administrators edit; everyone else reads. */
  readonly canEdit = input(false);
  readonly people = input<RotaPerson[]>([]);
  readonly edit = output<RotaSummary>();
  readonly remove = output<RotaSummary>();
  /** The rota changed here (an override added or removed). */
  readonly changed = output<RotaSummary>();

  protected readonly titleId = computed(() => `rota-${this.rota().id}`);
  protected readonly scopeWords = computed(() => {
    const s = this.rota().scope;
    return s.kind === 'fleet' ? 'Whole fleet' : `Site: ${s.siteName}`;
  });
  protected readonly offset = computed(() => offsetLabel(this.rota().timeZone));
  protected readonly shifts = computed(() => sortShifts(this.rota().shifts));
  protected readonly overrides = computed(() => [...this.rota().overrides].sort((a, b) => a.from.localeCompare(b.from)));
  protected readonly weekdayWord = weekdayWord;
  protected readonly busyOverride = signal<number | null>(null);
  protected readonly overrideError = signal<string | null>(null);

  /** "on watch" for the first of the chain when someone is, "backup" for the rest. */
  protected chainRole(index: number): string {
    return index === 0 && this.rota().onWatch ? 'on watch' : 'next in line';
  }

  protected editRota(): void {
    this.edit.emit(this.rota());
  }

  protected deleteRota(): void {
    this.remove.emit(this.rota());
  }

  protected overrideAdded(updated: RotaSummary): void {
    this.changed.emit(updated);
  }

  protected async deleteOverride(o: RotaOverrideRef): Promise<void> {
    this.busyOverride.set(o.id);
    this.overrideError.set(null);
    try {
      this.changed.emit(await firstValueFrom(this.api.removeOverride(this.rota().id, o.id)));
    } catch (err) {
      this.overrideError.set(problemMessage(err));
    } finally {
      this.busyOverride.set(null);
    }
  }
}
