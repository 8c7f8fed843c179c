// Signing in to the real service from tests.
import type { SessionResponse } from '../../shared/src/api/api-types';

export interface Session extends SessionResponse {
  /** The refresh cookie as a Cookie header value (name=value). */
  cookie: string;
}

export async function signIn(url: string, email: string, password: string): Promise<Session> {
  const res = await fetch(`${url}/api/auth/sign-in`, {
    method: 'POST',
    headers: { 'content-type': 'application/json' },
    body: JSON.stringify({ email, password }),
  });
  if (res.status !== 200) throw new Error(`sign-in as ${email} answered ${res.status}: ${await res.text()}`);
  const cookie = (res.headers.get('set-cookie') ?? '').split(';')[0];
  return { ...((await res.json()) as SessionResponse), cookie };
}

/** A JSON call with the session's bearer token. */
export async function api<T = any>(url: string, session: Session, path: string, init: { method?: string; body?: unknown } = {}): Promise<{ status: number; body: T }> {
  const res = await fetch(`${url}/api${path}`, {
    method: init.method ?? 'GET',
    headers: { authorization: `Bearer ${session.accessToken}`, 'content-type': 'application/json' },
    body: init.body === undefined ? undefined : JSON.stringify(init.body),
  });
  const text = await res.text();
  return { status: res.status, body: text ? JSON.parse(text) : undefined };
}
