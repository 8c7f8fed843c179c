import { HttpClient, HttpHeaders } from '@angular/common/http';
import { Injectable, computed, inject, signal } from '@angular/core';
import { firstValueFrom } from 'rxjs';
import { can, type Ability, type Role, type SessionResponse, type User } from '../../../../shared/src/api/api-types';

export type { Role, User };

/** The header the service requires on the routes that read the refresh cookie. */
export const CSRF_HEADERS = new HttpHeaders({ 'X-Whitecap-CSRF': '1' });

/** Why the session ended, for the sign-in screen to explain. */
export type SessionEnd = 'signed-out' | 'expired';

/**
 * The signed-in user and their access token, kept in memory only. The refresh token
 * lives in an httpOnly cookie the browser sends (same origin) to /api/auth; `refresh()` trades it for
 * a new access token (at start, before the token runs out, and after a 401).
 */
@Injectable({ providedIn: 'root' })
export class Session {
  private readonly http = inject(HttpClient);
  private readonly state = signal<{ token: string; user: User } | null>(null);
  private readonly endedBecause = signal<SessionEnd | null>(null);
  private refreshing: Promise<boolean> | null = null;
  private restoring: Promise<boolean> | null = null;
  private refreshTimer: ReturnType<typeof setTimeout> | undefined;

  readonly user = computed(() => this.state()?.user ?? null);
  readonly token = computed(() => this.state()?.token ?? null);
  readonly role = computed<Role | null>(() => this.state()?.user.role ?? null);
  readonly ended = this.endedBecause.asReadonly();

  /** Whether the signed-in user's role allows an ability (the service checks it again). */
  can(ability: Ability): boolean {
    return can(this.role(), ability);
  }

  async signIn(email: string, password: string): Promise<User> {
    const res = await firstValueFrom(this.http.post<SessionResponse>('/api/auth/sign-in', { email, password }));
    this.accept(res);
    return res.user;
  }

  /** Once per page load: picks up the session the refresh cookie still holds, if any. */
  restore(): Promise<boolean> {
    this.restoring ??= this.state() ? Promise.resolve(true) : this.refresh({ quiet: true });
    return this.restoring;
  }

  /** Trades the refresh cookie for a new access token; concurrent callers share one request. */
  refresh(options: { quiet?: boolean } = {}): Promise<boolean> {
    this.refreshing ??= firstValueFrom(
      this.http.post<SessionResponse>('/api/auth/refresh', null, { headers: CSRF_HEADERS }),
    )
      .then((res) => {
        this.accept(res);
        return true;
      })
      .catch(() => {
        const wasSignedIn = !!this.state();
        this.clear(wasSignedIn && !options.quiet ? 'expired' : null);
        return false;
      })
      .finally(() => (this.refreshing = null));
    return this.refreshing;
  }

  /** Ends the session here and on the service (the refresh cookie is revoked). */
  async signOut(): Promise<void> {
    this.clear('signed-out');
    try {
      await firstValueFrom(this.http.post('/api/auth/sign-out', null, { headers: CSRF_HEADERS }));
    } catch {
      /* the local session is gone either way */
    }
  }

  private accept(res: SessionResponse): void {
    this.state.set({ token: res.accessToken, user: res.user });
    this.endedBecause.set(null);
    clearTimeout(this.refreshTimer);
    // Refresh a minute before the token runs out (or at 80 % of a short lifetime).
    const inMs = Math.max(5, Math.min(res.expiresIn - 60, res.expiresIn * 0.8)) * 1000;
    this.refreshTimer = setTimeout(() => void this.refresh(), inMs);
  }

  private clear(reason: SessionEnd | null): void {
    clearTimeout(this.refreshTimer);
    this.state.set(null);
    this.endedBecause.set(reason);
  }
}
