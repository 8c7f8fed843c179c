import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { FormBuilder, ReactiveFormsModule, Validators } from '@angular/forms';
import { MatButtonModule } from '@angular/material/button';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatPaginatorModule, type PageEvent } from '@angular/material/paginator';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { MatSelectModule } from '@angular/material/select';
import { MatSlideToggleModule } from '@angular/material/slide-toggle';
import { MatTableModule } from '@angular/material/table';
import { Subject, combineLatest, distinctUntilChanged, firstValueFrom, startWith, switchMap } from 'rxjs';
import type { Page, Role, User } from '../../../../shared/src/api/api-types';
import { Session } from '../auth/session';
import { foldLoad, initialLoad, loadSteps } from '../feedback/load-state';
import { Notice } from '../feedback/notice';
import { problemMessage } from '../feedback/problem-message';
import { formatDateTime } from '../time/age';
import { AdminApi } from './admin-api';
import { settleAfterFirst } from '../time/settle';

export const ROLES: { role: Role; words: string }[] = [
  { role: 'viewer', words: 'Viewer: sees the fleet, estimators and alerts' },
  { role: 'responder', words: 'Responder: also acknowledges, annotates and resolves alerts' },
  { role: 'designer', words: 'Designer: also sees the quarantine and designs' },
  { role: 'admin', words: 'Admin: everything, including users and device credentials' },
];

/** The service's rule for passwords (at least 10 characters). */
export const MIN_PASSWORD = 10;

/** Users and their roles: list, create, edit (name, role, active). */
@Component({
  selector: 'wc-users-admin',
  imports: [
    ReactiveFormsModule,
    MatTableModule,
    MatPaginatorModule,
    MatFormFieldModule,
    MatInputModule,
    MatSelectModule,
    MatSlideToggleModule,
    MatButtonModule,
    MatProgressBarModule,
    Notice,
  ],
  templateUrl: './users-admin.html',
  styleUrl: './admin-section.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class UsersAdmin {
  private readonly api = inject(AdminApi);
  private readonly fb = inject(FormBuilder).nonNullable;
  protected readonly me = inject(Session).user;
  protected readonly roles = ROLES;
  protected readonly minPassword = MIN_PASSWORD;
  protected readonly formatDateTime = formatDateTime;
  protected readonly columns = ['displayName', 'email', 'role', 'active', 'createdAt', 'edit'];

  protected readonly searchText = signal('');
  protected readonly page = signal({ pageIndex: 0, pageSize: 25 });
  private readonly reload$ = new Subject<void>();
  protected readonly users = toSignal(
    combineLatest([
      toObservable(this.searchText).pipe(settleAfterFirst(300), distinctUntilChanged()),
      toObservable(this.page),
      this.reload$.pipe(startWith(null)),
    ]).pipe(
      switchMap(([q, p]) => loadSteps(this.api.users(q, p.pageIndex, p.pageSize))),
      foldLoad(),
    ),
    { initialValue: initialLoad<Page<User>>() },
  );
  protected readonly rows = computed(() => this.users().value?.items ?? []);

  protected readonly createForm = this.fb.group({
    email: ['', [Validators.required, Validators.email, Validators.maxLength(320)]],
    displayName: ['', [Validators.required, Validators.maxLength(120)]],
    role: ['viewer' as Role, Validators.required],
    password: ['', [Validators.required, Validators.minLength(MIN_PASSWORD), Validators.maxLength(200)]],
  });
  protected readonly creating = signal(false);
  protected readonly createError = signal<string | null>(null);
  protected readonly createDone = signal<string | null>(null);

  protected readonly editing = signal<User | null>(null);
  protected readonly editForm = this.fb.group({
    displayName: ['', [Validators.required, Validators.maxLength(120)]],
    role: ['viewer' as Role, Validators.required],
    active: [true],
  });
  protected readonly saving = signal(false);
  protected readonly editError = signal<string | null>(null);

  protected search(text: string): void {
    this.searchText.set(text);
    this.page.update((p) => ({ ...p, pageIndex: 0 }));
  }

  protected pageTo(event: PageEvent): void {
    this.page.set({ pageIndex: event.pageIndex, pageSize: event.pageSize });
  }

  protected retry(): void {
    this.reload$.next();
  }

  protected async createUser(): Promise<void> {
    if (this.createForm.invalid) {
      this.createForm.markAllAsTouched();
      return;
    }
    this.creating.set(true);
    this.createError.set(null);
    this.createDone.set(null);
    try {
      const user = await firstValueFrom(this.api.createUser(this.createForm.getRawValue()));
      this.createForm.reset();
      this.createDone.set(`${user.displayName} (${user.email}) can now sign in as ${user.role}.`);
      this.reload$.next();
    } catch (err) {
      this.createError.set(problemMessage(err));
    } finally {
      this.creating.set(false);
    }
  }

  protected editUser(user: User): void {
    this.editing.set(user);
    this.editError.set(null);
    this.editForm.reset({ displayName: user.displayName, role: user.role, active: user.active ?? true });
  }

  protected cancelEdit(): void {
    this.editing.set(null);
  }

  protected async saveUser(): Promise<void> {
    const user = this.editing();
    if (!user) return;
    if (this.editForm.invalid) {
      this.editForm.markAllAsTouched();
      return;
    }
    const v = this.editForm.getRawValue();
    const change = {
      ...(v.displayName !== user.displayName ? { displayName: v.displayName } : {}),
      ...(v.role !== user.role ? { role: v.role } : {}),
      ...(v.active !== (user.active ?? true) ? { active: v.active } : {}),
    };
    if (Object.keys(change).length === 0) {
      this.editing.set(null);
      return;
    }
    this.saving.set(true);
    this.editError.set(null);
    try {
      await firstValueFrom(this.api.updateUser(user.id, change));
      this.editing.set(null);
      this.reload$.next();
    } catch (err) {
      this.editError.set(problemMessage(err));
    } finally {
      this.saving.set(false);
    }
  }
}
