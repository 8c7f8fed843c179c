import { HttpErrorResponse, provideHttpClient } from '@angular/common/http';
import { HttpTestingController, provideHttpClientTesting } from '@angular/common/http/testing';
import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed } from '@angular/core/testing';
import { provideRouter } from '@angular/router';
import { SignIn, signInErrorMessage } from './sign-in';

describe('signInErrorMessage', () => {
  it('tells the user what to do for each kind of failure', () => {
    expect(signInErrorMessage(new HttpErrorResponse({ status: 0 }))).toContain('cannot be reached');
    expect(signInErrorMessage(new HttpErrorResponse({ status: 401 }))).toContain('do not match');
    expect(signInErrorMessage(new HttpErrorResponse({ status: 429 }))).toContain('Wait a minute');
    expect(signInErrorMessage(new HttpErrorResponse({ status: 400, error: { detail: 'Send a JSON body.' } }))).toBe(
      'Send a JSON body.',
    );
    expect(signInErrorMessage(new Error('x'))).toContain('Try again');
  });
});

describe('SignIn', () => {
  beforeEach(() => {
    TestBed.configureTestingModule({
      imports: [SignIn],
      providers: [provideZonelessChangeDetection(), provideHttpClient(), provideHttpClientTesting(), provideRouter([])],
    });
  });

  it('does not call the API while the form is incomplete, and shows what is missing', async () => {
    const fixture = TestBed.createComponent(SignIn);
    await fixture.whenStable();
    const el: HTMLElement = fixture.nativeElement;
    el.querySelector<HTMLButtonElement>('button[type=submit]')!.click();
    await fixture.whenStable();
    TestBed.inject(HttpTestingController).expectNone('/api/auth/sign-in');
    expect(el.textContent).toContain('Enter your e-mail address.');
    expect(el.textContent).toContain('Enter your password.');
  });

  it('posts the credentials and shows the server\'s refusal in an alert', async () => {
    const fixture = TestBed.createComponent(SignIn);
    await fixture.whenStable();
    const el: HTMLElement = fixture.nativeElement;
    const [email, password] = Array.from(el.querySelectorAll('input'));
    email.value = 'responder@saltmarsh.example';
    email.dispatchEvent(new Event('input'));
    password.value = 'nope';
    password.dispatchEvent(new Event('input'));
    el.querySelector<HTMLButtonElement>('button[type=submit]')!.click();

    const req = TestBed.inject(HttpTestingController).expectOne('/api/auth/sign-in');
    expect(req.request.body).toEqual({ email: 'responder@saltmarsh.example', password: 'nope' });
    req.flush({ detail: 'no' }, { status: 401, statusText: 'Unauthorized' });
    await fixture.whenStable();
    expect(el.querySelector('[role=alert]')?.textContent).toContain('do not match an active account');
  });
});
