import { HttpClient, provideHttpClient, withInterceptors } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed } from '@angular/core/testing';
import { firstValueFrom } from 'rxjs';
import type { SessionResponse } from '../../../../shared/src/api/api-types';
import { bearerToken } from './bearer-token';
import { Session } from './session';

const session = (token: string): SessionResponse => ({
  accessToken: token,
  expiresIn: 900,
  user: { id: 2, email: 'responder@saltmarsh.example', displayName: 'Ravi Castellan (on call)', role: 'responder' },
});

describe('Session and the bearer token', () => {
  let http: HttpTestingController;
  let client: HttpClient;
  let s: Session;

  beforeEach(() => {
    TestBed.configureTestingModule({
      providers: [provideZonelessChangeDetection(), provideHttpClient(withInterceptors([bearerToken])), provideHttpClientTesting()],
    });
    http = TestBed.inject(HttpTestingController);
    client = TestBed.inject(HttpClient);
    s = TestBed.inject(Session);
  });
  afterEach(() => http.verify());

  async function signIn(): Promise<void> {
    const p = s.signIn('responder@saltmarsh.example', 'pw');
    http.expectOne('/api/auth/sign-in').flush(session('first'));
    await p;
  }

  it('restores a session from the refresh cookie with the CSRF header, once per page load', async () => {
    const restoring = s.restore();
    const req = http.expectOne('/api/auth/refresh');
    expect(req.request.method).toBe('POST');
    expect(req.request.headers.get('X-Whitecap-CSRF')).toBe('1');
    req.flush(session('restored'));
    expect(await restoring).toBe(true);
    expect(s.user()?.role).toBe('responder');
    expect(await s.restore()).toBe(true);
  });

  it('stays signed out quietly when there is no session to restore', async () => {
    const restoring = s.restore();
    http.expectOne('/api/auth/refresh').flush({ detail: 'No session to refresh; sign in.' }, { status: 401, statusText: 'Unauthorized' });
    expect(await restoring).toBe(false);
    expect(s.user()).toBeNull();
    expect(s.ended()).toBeNull();
  });

  it('sends the access token, and after a 401 refreshes once and retries with the new token', async () => {
    await signIn();
    const answer = firstValueFrom(client.get<{ ok: boolean }>('/api/fleet'));
    const first = http.expectOne('/api/fleet');
    expect(first.request.headers.get('Authorization')).toBe('Bearer first');
    first.flush({ detail: 'expired' }, { status: 401, statusText: 'Unauthorized' });
    await Promise.resolve();
    http.expectOne('/api/auth/refresh').flush(session('second'));
    await new Promise((r) => setTimeout(r, 0));
    const retried = http.expectOne('/api/fleet');
    expect(retried.request.headers.get('Authorization')).toBe('Bearer second');
    retried.flush({ ok: true });
    await expect(answer).resolves.toEqual({ ok: true });
  });

  it('ends the session as expired when the refresh after a 401 fails', async () => {
    await signIn();
    const answer = firstValueFrom(client.get('/api/alerts'));
    http.expectOne('/api/alerts').flush({}, { status: 401, statusText: 'Unauthorized' });
    await Promise.resolve();
    http.expectOne('/api/auth/refresh').flush({}, { status: 401, statusText: 'Unauthorized' });
    await expect(answer).rejects.toMatchObject({ status: 401 });
    expect(s.user()).toBeNull();
    expect(s.ended()).toBe('expired');
  });

  it('signs out on the service too, with the CSRF header', async () => {
    await signIn();
    const out = s.signOut();
    expect(s.user()).toBeNull();
    const req = http.expectOne('/api/auth/sign-out');
    expect(req.request.headers.get('X-Whitecap-CSRF')).toBe('1');
    req.flush(null, { status: 204, statusText: 'No Content' });
    await out;
    expect(s.ended()).toBe('signed-out');
  });
});
