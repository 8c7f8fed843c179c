import { HttpErrorResponse } from '@angular/common/http';
import { ChangeDetectionStrategy, Component, computed, inject, signal } from '@angular/core';
import { FormBuilder, ReactiveFormsModule, Validators } from '@angular/forms';
import { MatButtonModule } from '@angular/material/button';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { ActivatedRoute, Router } from '@angular/router';
import { WhitecapMark } from '../shell/whitecap-mark';
import { Session } from './session';

/** Turns a failed sign-in into a sentence that says what to do. */
export function signInErrorMessage(err: unknown): string {
  if (err instanceof HttpErrorResponse) {
    if (err.status === 0) return 'Whitecap cannot be reached. Check your connection and try again.';
    if (err.status === 401) return 'That e-mail and password do not match an active account.';
    if (err.status === 429) return 'Too many attempts. Wait a minute, then try again.';
    const detail = typeof err.error === 'object' && err.error && 'detail' in err.error ? String(err.error.detail) : '';
    return detail || `Sign-in failed (${err.status}). Try again, or ask your administrator.`;
  }
  return 'Sign-in failed. Try again, or ask your administrator.';
}

/** Only paths inside the app are followed after sign-in; anything else lands on the fleet. */
export function safeReturnUrl(url: string | null): string {
  return url && url.startsWith('/') && !url.startsWith('//') && !url.startsWith('/sign-in') ? url : '/fleet';
}

@Component({
  selector: 'wc-sign-in',
  imports: [ReactiveFormsModule, MatButtonModule, MatFormFieldModule, MatInputModule, MatProgressBarModule, WhitecapMark],
  templateUrl: './sign-in.html',
  styleUrl: './sign-in.scss',
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class SignIn {
  private readonly session = inject(Session);
  private readonly router = inject(Router);
  private readonly route = inject(ActivatedRoute);
  /** Set when the session ran out rather than being ended by the user. */
  protected readonly expired = computed(() => this.session.ended() === 'expired');

  protected readonly form = inject(FormBuilder).nonNullable.group({
    email: ['', [Validators.required, Validators.email]],
    password: ['', Validators.required],
  });
  protected readonly busy = signal(false);
  protected readonly error = signal<string | null>(null);

  protected async signIn(): Promise<void> {
    if (this.form.invalid) {
      this.form.markAllAsTouched();
      return;
    }
    this.busy.set(true);
    this.error.set(null);
    try {
      const { email, password } = this.form.getRawValue();
      await this.session.signIn(email, password);
      await this.router.navigateByUrl(safeReturnUrl(this.route.snapshot.queryParamMap.get('returnUrl')));
    } catch (err) {
      this.error.set(signInErrorMessage(err));
    } finally {
      this.busy.set(false);
    }
  }
}
