import { provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { Component, provideZonelessChangeDetection } from '@angular/core';
import { TestBed } from '@angular/core/testing';
import { MatSnackBar } from '@angular/material/snack-bar';
import { Router, provideRouter } from '@angular/router';
import type { Role } from '../../../../shared/src/api/api-types';
import { allowedFor } from './role-guard';
import { Session } from './session';

@Component({ template: '' })
class Page {}

describe('allowedFor', () => {
  async function navigateAs(role: Role, url: string) {
    const snack = { open: jest.fn() };
    TestBed.configureTestingModule({
      providers: [
        provideZonelessChangeDetection(),
        provideHttpClient(),
        provideHttpClientTesting(),
        { provide: MatSnackBar, useValue: snack },
        provideRouter([
          { path: 'fleet', component: Page },
          { path: 'admin', component: Page, canActivate: [allowedFor('administer')] },
          { path: 'quarantine', component: Page, canActivate: [allowedFor('quarantine')] },
        ]),
      ],
    });
    const signingIn = TestBed.inject(Session).signIn('x@saltmarsh.example', 'pw');
    TestBed.inject(HttpTestingController)
      .expectOne('/api/auth/sign-in')
      .flush({ accessToken: 't', expiresIn: 900, user: { id: 1, email: 'x@saltmarsh.example', displayName: 'X', role } });
    await signingIn;
    const router = TestBed.inject(Router);
    await router.navigateByUrl(url);
    return { url: router.url, snack };
  }

  it('sends a viewer who opens the administration to the fleet overview, saying why', async () => {
    const { url, snack } = await navigateAs('viewer', '/admin');
    expect(url).toBe('/fleet');
    expect(snack.open.mock.calls[0][0]).toContain('Your role (viewer) cannot administer Whitecap');
  });

  it('lets an admin in, and a designer into the quarantine', async () => {
    expect((await navigateAs('admin', '/admin')).url).toBe('/admin');
    TestBed.resetTestingModule();
    expect((await navigateAs('designer', '/quarantine')).url).toBe('/quarantine');
  });
});
