import { ChangeDetectionStrategy, Component, OnInit, computed, inject, input, output, signal } from '@angular/core';
import { toSignal } from '@angular/core/rxjs-interop';
import { FormBuilder, FormControl, FormGroup, ReactiveFormsModule } from '@angular/forms';
import { MatAutocompleteModule } from '@angular/material/autocomplete';
import { MatButtonModule } from '@angular/material/button';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatSelectModule } from '@angular/material/select';
import { firstValueFrom, startWith } from 'rxjs';
import type { RotaSummary, Site } from '../../../../shared/src/api/api-types';
import { problemIssues, type ProblemIssue } from '../feedback/problem-issues';
import { problemMessage } from '../feedback/problem-message';
import { RotaApi, type RotaPerson } from './rota-api';
import { WEEKDAYS, draftFromRota, emptyDraft, issueLabel, issuesAt, rotaDraftIssues, sortShifts, toRotaInput, type RotaDraft, type ShiftRow } from './rota-draft';
import { timeZoneNames, viewerTimeZone } from './zoned-time';

type ShiftGroup = FormGroup<{ weekday: FormControl<number>; handover: FormControl<string>; userId: FormControl<number | null> }>;

/** Creates a watch rota or changes one: name, scope, time zone, weekly shifts, backups in order. */
@Component({
  selector: 'wc-rota-editor',
  imports: [ReactiveFormsModule, MatFormFieldModule, MatInputModule, MatSelectModule, MatAutocompleteModule, MatButtonModule],
  templateUrl: './rota-editor.html',
  styleUrl: './rota-editor.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class RotaEditor implements OnInit {
  private readonly api = inject(RotaApi);
  private readonly fb = inject(FormBuilder).nonNullable;
  /** The rota to change; null for a new one. */
  readonly rota = input<RotaSummary | null>(null);
  readonly people = input<RotaPerson[]>([]);
  readonly sites = input<Site[]>([]);
  readonly saved = output<RotaSummary>();
  readonly cancelled = output<void>();

  protected readonly weekdays = WEEKDAYS;
  protected readonly form = this.fb.group({
    name: [''],
    siteId: [null as number | null],
    timeZone: [''],
    shifts: this.fb.array<ShiftGroup>([]),
  });
  protected readonly backups = signal<number[]>([]);
  protected readonly backupToAdd = signal<number | null>(null);

  private readonly zoneText = toSignal(this.form.controls.timeZone.valueChanges.pipe(startWith('')), { initialValue: '' });
  private readonly zones = computed(() => timeZoneNames([this.rota()?.timeZone ?? '']));
  /** Zones matching what is typed (every part of the name counts: "lond" finds Europe/London). */
  protected readonly zoneOptions = computed(() => {
    const q = this.zoneText().trim().toLowerCase().replace(/\s+/g, '_');
    const all = this.zones();
    return (q ? all.filter((z) => z.toLowerCase().includes(q)) : all).slice(0, 80);
  });
  protected readonly backupChoices = computed(() => this.people().filter((p) => !this.backups().includes(p.userId)));

  protected readonly saving = signal(false);
  protected readonly problem = signal<string | null>(null);
  protected readonly issues = signal<ProblemIssue[]>([]);
  protected readonly label = issueLabel;
  protected readonly heading = computed(() => (this.rota() ? `Change ${this.rota()!.name}` : 'New watch rota'));

  ngOnInit(): void {
    this.fillForm();
  }

  protected get shiftRows() {
    return this.form.controls.shifts;
  }

  protected rowIssues(index: number): ProblemIssue[] {
    return issuesAt(this.issues(), `shifts.${index}`);
  }

  protected fieldIssue(path: string): string | null {
    return this.issues().find((i) => i.path === path)?.message ?? null;
  }

  protected personName(userId: number): string {
    return this.people().find((p) => p.userId === userId)?.displayName ?? this.rota()?.backups.find((b) => b.userId === userId)?.displayName ?? `user ${userId}`;
  }

  protected addShift(): void {
    const last = this.shiftRows.at(this.shiftRows.length - 1)?.getRawValue();
    this.shiftRows.push(this.shiftGroup({ weekday: last ? (last.weekday % 7) + 1 : 1, handover: last?.handover ?? '08:00', userId: last?.userId ?? null }));
  }

  protected removeShift(index: number): void {
    this.shiftRows.removeAt(index);
  }

  protected addBackup(): void {
    const id = this.backupToAdd();
    if (id === null || this.backups().includes(id)) return;
    this.backups.update((b) => [...b, id]);
    this.backupToAdd.set(null);
  }

  protected moveBackup(index: number, by: -1 | 1): void {
    this.backups.update((b) => {
      const to = index + by;
      if (to < 0 || to >= b.length) return b;
      const next = [...b];
      [next[index], next[to]] = [next[to], next[index]];
      return next;
    });
  }

  protected removeBackup(index: number): void {
    this.backups.update((b) => b.filter((_, i) => i !== index));
  }

  protected cancelEdit(): void {
    this.cancelled.emit();
  }

  protected async saveRota(): Promise<void> {
    // Rows in the order of the week first, so the service's problem paths match the rows shown.
    this.putShiftsInWeekOrder();
    const draft = this.draft();
    this.problem.set(null);
    const issues = rotaDraftIssues(draft);
    this.issues.set(issues);
    if (issues.length) {
      this.problem.set('Some fields need attention before the rota can be saved.');
      return;
    }
    this.saving.set(true);
    try {
      const input = toRotaInput(draft);
      const rota = this.rota();
      const saved = await firstValueFrom(rota ? this.api.update(rota.id, input) : this.api.create(input));
      this.saved.emit(saved);
    } catch (err) {
      this.problem.set(problemMessage(err));
      this.issues.set(problemIssues(err));
    } finally {
      this.saving.set(false);
    }
  }

  private draft(): RotaDraft {
    const v = this.form.getRawValue();
    return { name: v.name, siteId: v.siteId, timeZone: v.timeZone.trim(), shifts: v.shifts, backups: this.backups() };
  }

  /** Reorders the rows themselves (the same controls), so the inputs keep their focus and state. */
  private putShiftsInWeekOrder(): void {
    const sorted = sortShifts(this.shiftRows.controls.map((control) => ({ control, ...control.getRawValue() }))).map((r) => r.control);
    this.shiftRows.clear({ emitEvent: false });
    for (const control of sorted) this.shiftRows.push(control, { emitEvent: false });
    this.shiftRows.updateValueAndValidity();
  }

  private fillForm(): void {
    const rota = this.rota();
    const draft = rota ? draftFromRota(rota) : emptyDraft(viewerTimeZone());
    this.form.patchValue({ name: draft.name, siteId: draft.siteId, timeZone: draft.timeZone });
    this.shiftRows.clear();
    for (const s of draft.shifts) this.shiftRows.push(this.shiftGroup(s));
    this.backups.set(draft.backups);
  }

  private shiftGroup(s: ShiftRow): ShiftGroup {
    return this.fb.group({ weekday: [s.weekday], handover: [s.handover], userId: [s.userId] });
  }
}
