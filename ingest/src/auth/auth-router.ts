// /api/auth: sign-in, session refresh, sign-out, who am I, change my password.
// The refresh token travels only in an httpOnly, SameSite=Strict cookie scoped to
// /api/auth; the routes that read it also require the X-Whitecap-CSRF header, which a
// cross-site form cannot send (and CORS is closed), so a forged request is refused; and a
// request a browser marks as coming from another site (Origin, Sec-Fetch-Site) is refused
// on every route that reads or sets the cookie.
import { Router, type RequestHandler } from 'express';
import { rateLimit } from 'express-rate-limit';
import { z } from 'zod';
import type { User } from '../../../shared/src/api/api-types';
import { HttpProblem } from '../http/problem';
import { AuthError, type AuthService } from './auth-service';
import type { PassportInstance } from './passport-setup';

export const REFRESH_COOKIE = 'wc_refresh';
export const CSRF_HEADER = 'x-whitecap-csrf';

const signInBody = z.object({
  email: z.string().trim().min(1).max(320),
  password: z.string().min(1).max(1024),
});
const passwordBody = z.object({
  currentPassword: z.string().min(1).max(1024),
  newPassword: z.string().min(1).max(1024),
});

function authProblem(err: AuthError): HttpProblem {
  const status = err.kind === 'weak-password' ? 400 : err.kind === 'locked' ? 423 : 401;
  return new HttpProblem(status, err.kind, err.kind === 'weak-password' ? 'Password not accepted' : 'Not signed in', err.message);
}

/** Requires a valid bearer access token; puts the user on req.user. */
export function requireSignedIn(passport: PassportInstance): RequestHandler {
  return (req, res, next) => {
    passport.authenticate('jwt', { session: false }, (err: unknown, user: User | false) => {
      if (err) return next(err);
      if (!user) {
        return next(new HttpProblem(401, 'unauthenticated', 'Sign-in required', 'A valid access token is required; sign in again.'));
      }
      req.user = user;
      next();
    })(req, res, next);
  };
}

/**
 * Refuses what a browser sends on behalf of another site: an Origin that is neither this
 * host nor the public URL's (or is "null"), or Sec-Fetch-Site: cross-site or same-site.
 * Clients that are not browsers send neither header and pass.
 */
export function requireSameOrigin(publicUrl?: string): RequestHandler {
  const publicHost = publicUrl ? new URL(publicUrl).host : null;
  return (req, _res, next) => {
    const site = req.get('sec-fetch-site');
    const origin = req.get('origin');
    let originHost: string | null = null;
    if (origin !== undefined) {
      try {
        originHost = new URL(origin).host || null;
      } catch {
        originHost = null;
      }
    }
    const siteOk = site === undefined || site === 'same-origin' || site === 'none';
    const originOk = origin === undefined || (originHost !== null && (originHost === req.get('host') || originHost === publicHost));
    if (!siteOk || !originOk) {
      return next(new HttpProblem(403, 'cross-site', 'Request refused', 'Sign-in and sessions are served only to pages of this site.'));
    }
    next();
  };
}

const requireCsrfHeader: RequestHandler = (req, _res, next) => {
  if (req.get(CSRF_HEADER) !== '1') {
    return next(new HttpProblem(403, 'csrf', 'Request refused', `This request needs the ${CSRF_HEADER} header.`));
  }
  next();
};

export interface AuthRouterOptions {
  secureCookies: boolean;
  /** Sign-in attempts (and password changes) per client address per minute. */
  signInPerMinute: number;
  /** The address the dashboard is served from: its origin is accepted besides the request's own host. */
  publicUrl?: string;
}

export function authRouter(auth: AuthService, passport: PassportInstance, options: AuthRouterOptions): Router {
  const router = Router();
  const cookie = (maxAgeMs: number) => ({
    httpOnly: true,
    sameSite: 'strict' as const,
    secure: options.secureCookies,
    path: '/api/auth',
    maxAge: maxAgeMs,
  });
  const limiter = (what: string) =>
    rateLimit({
      windowMs: 60_000,
      limit: options.signInPerMinute,
      standardHeaders: 'draft-8',
      legacyHeaders: false,
      handler: (_req, _res, next) =>
        next(new HttpProblem(429, 'too-many-requests', 'Too many attempts', `Too many ${what} from here; wait a minute, then try again.`)),
    });
  const signInLimiter = limiter('sign-in attempts');
  // Guessing the current password with a stolen access token is as limited as guessing it at sign-in.
  const passwordLimiter = limiter('password changes');
  const sameOrigin = requireSameOrigin(options.publicUrl);
  // Answers here carry tokens or session state: never kept by a cache.
  router.use((_req, res, next) => {
    res.set('Cache-Control', 'no-store');
    next();
  });

  router.post('/sign-in', sameOrigin, signInLimiter, (req, res, next) => {
    const parsed = signInBody.safeParse(req.body);
    if (!parsed.success) {
      return next(new HttpProblem(400, 'invalid-request', 'Invalid request', 'Send a JSON body with email and password.'));
    }
    passport.authenticate('local', { session: false }, (err: unknown, user: User | false, info?: { message: string; kind: AuthError['kind'] }) => {
      if (err) return next(err);
      if (!user) return next(authProblem(new AuthError(info?.kind ?? 'bad-credentials', info?.message ?? 'Sign-in failed.')));
      auth.issueRefreshToken(user.id).then((refresh) => {
        res.cookie(REFRESH_COOKIE, refresh.token, cookie(refresh.maxAgeMs));
        res.json({ ...auth.issueAccessToken(user), user });
      }, next);
    })(req, res, next);
  });

  router.post('/refresh', sameOrigin, requireCsrfHeader, async (req, res) => {
    const token = req.cookies?.[REFRESH_COOKIE] as string | undefined;
    if (!token) throw new HttpProblem(401, 'session-expired', 'Not signed in', 'No session to refresh; sign in.');
    try {
      const { user, refresh } = await auth.refresh(token);
      res.cookie(REFRESH_COOKIE, refresh.token, cookie(refresh.maxAgeMs));
      res.json({ ...auth.issueAccessToken(user), user });
    } catch (err) {
      res.clearCookie(REFRESH_COOKIE, { path: '/api/auth' });
      throw err instanceof AuthError ? authProblem(err) : err;
    }
  });

  router.post('/sign-out', sameOrigin, requireCsrfHeader, async (req, res) => {
    await auth.signOut(req.cookies?.[REFRESH_COOKIE] as string | undefined);
    res.clearCookie(REFRESH_COOKIE, { path: '/api/auth' });
    res.status(204).end();
  });

  router.get('/me', requireSignedIn(passport), (req, res) => {
    res.json(req.user);
  });

  router.post('/password', requireSignedIn(passport), passwordLimiter, async (req, res) => {
    const parsed = passwordBody.safeParse(req.body);
    if (!parsed.success) throw new HttpProblem(400, 'invalid-request', 'Invalid request', 'Send currentPassword and newPassword.');
    try {
      await auth.changePassword((req.user as User).id, parsed.data.currentPassword, parsed.data.newPassword);
    } catch (err) {
      throw err instanceof AuthError ? authProblem(err) : err;
    }
    res.status(204).end();
  });

  return router;
}
