import { HttpClient } from '@angular/common/http';
import { Injectable, computed, inject, signal } from '@angular/core';
import { firstValueFrom } from 'rxjs';

export type Role = 'viewer' | 'responder' | 'designer' | 'admin';

export interface SessionUser {
  id: number;
  email: string;
  displayName: string;
  role: Role;
}

interface SignInResponse {
  accessToken: string;
  expiresIn: number;
  user: SessionUser;
}

/** The signed-in user and their access token (kept in memory only). */
@Injectable({ providedIn: 'root' })
export class Session {
  private readonly http = inject(HttpClient);
  private readonly state = signal<{ token: string; user: SessionUser } | null>(null);

  readonly user = computed(() => this.state()?.user ?? null);
  readonly token = computed(() => this.state()?.token ?? null);

  async signIn(email: string, password: string): Promise<SessionUser> {
    const res = await firstValueFrom(this.http.post<SignInResponse>('/api/auth/sign-in', { email, password }));
    this.state.set({ token: res.accessToken, user: res.user });
    return res.user;
  }

  signOut(): void {
    this.state.set(null);
  }
}
