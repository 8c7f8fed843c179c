import { Router, type RequestHandler } from 'express';
import { z } from 'zod';
import { HttpProblem } from '../http/problem';
import type { AuthService, PublicUser } from './auth-service';
import type { createPassport } from './passport-setup';

type PassportInstance = ReturnType<typeof createPassport>;

const signInBody = z.object({
  email: z.string().min(1).max(320),
  password: z.string().min(1).max(1024),
});

/** Requires a valid bearer access token; puts the user on req.user. */
export function requireSignedIn(passport: PassportInstance): RequestHandler {
  return (req, res, next) => {
    passport.authenticate('jwt', { session: false }, (err: unknown, user: PublicUser | false) => {
      if (err) return next(err);
      if (!user) {
        return next(new HttpProblem(401, 'unauthenticated', 'Sign-in required', 'A valid access token is required.'));
      }
      req.user = user;
      next();
    })(req, res, next);
  };
}

export function authRouter(auth: AuthService, passport: PassportInstance): Router {
  const router = Router();

  router.post('/sign-in', (req, res, next) => {
    const parsed = signInBody.safeParse(req.body);
    if (!parsed.success) {
      return next(new HttpProblem(400, 'invalid-request', 'Invalid request', 'Send a JSON body with email and password.'));
    }
    passport.authenticate('local', { session: false }, (err: unknown, user: PublicUser | false) => {
      if (err) return next(err);
      if (!user) {
        return next(
          new HttpProblem(401, 'bad-credentials', 'Sign-in failed', 'That e-mail and password do not match an active account.'),
        );
      }
      res.json({ ...auth.issueAccessToken(user), user });
    })(req, res, next);
  });

  router.get('/me', requireSignedIn(passport), (req, res) => {
    res.json(req.user);
  });

  return router;
}
