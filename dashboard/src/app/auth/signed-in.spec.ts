import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { Component, provideZonelessChangeDetection } from '@angular/core';
import { TestBed } from '@angular/core/testing';
import { Router, provideRouter } from '@angular/router';
import { Session } from './session';
import { signedIn } from './signed-in';

@Component({ template: '' })
class Page {}

describe('signedIn', () => {
  let http: HttpTestingController;
  let router: Router;

  beforeEach(() => {
    TestBed.configureTestingModule({
      providers: [
        provideZonelessChangeDetection(),
        provideHttpClient(),
        provideHttpClientTesting(),
        provideRouter([
          { path: 'sign-in', component: Page },
          { path: 'fleet', component: Page, canActivate: [signedIn] },
          { path: 'alerts', component: Page, canActivate: [signedIn] },
        ]),
      ],
    });
    http = TestBed.inject(HttpTestingController);
    router = TestBed.inject(Router);
  });

  it('restores the session after a reload and lets the visitor in, until they sign out', async () => {
    const going = router.navigateByUrl('/alerts');
    await new Promise((r) => setTimeout(r, 0)); // the router reaches the guard
    http.expectOne('/api/auth/refresh').flush({
      accessToken: 't',
      expiresIn: 900,
      user: { id: 1, email: 'v@saltmarsh.example', displayName: 'V', role: 'viewer' },
    });
    await going;
    expect(router.url).toBe('/alerts');

    const out = TestBed.inject(Session).signOut();
    http.expectOne('/api/auth/sign-out').flush(null, { status: 204, statusText: 'No Content' });
    await out;
    await router.navigateByUrl('/fleet');
    expect(router.url).toBe('/sign-in');
  });

  it('sends a visitor without a session to sign in, with the way back, and again after signing out', async () => {
    const going = router.navigateByUrl('/alerts');
    await new Promise((r) => setTimeout(r, 0)); // the router reaches the guard
    http.expectOne('/api/auth/refresh').flush({}, { status: 401, statusText: 'Unauthorized' });
    await going;
    expect(router.url).toBe('/sign-in?returnUrl=%2Falerts');

    const session = TestBed.inject(Session);
    const signingIn = session.signIn('v@saltmarsh.example', 'pw');
    http.expectOne('/api/auth/sign-in').flush({ accessToken: 't', expiresIn: 900, user: { id: 1, email: 'v@saltmarsh.example', displayName: 'V', role: 'viewer' } });
    await signingIn;
    await router.navigateByUrl('/fleet');
    expect(router.url).toBe('/fleet');
    const out = session.signOut();
    http.expectOne('/api/auth/sign-out').flush(null, { status: 204, statusText: 'No Content' });
    await out;
    await router.navigateByUrl('/alerts');
    expect(router.url).toBe('/sign-in?returnUrl=%2Falerts');
  });
});
