// Passport strategies: `local` (e-mail and password, for sign-in) and `jwt` (the bearer
// access token on every other API call).
import { Passport } from 'passport';
import { ExtractJwt, Strategy as JwtStrategy } from 'passport-jwt';
import { Strategy as LocalStrategy } from 'passport-local';
import { AuthError, publicUser, type AuthService } from './auth-service';
import type { UsersRepository } from './users-repository';

export type PassportInstance = InstanceType<typeof Passport>;

export function createPassport(auth: AuthService, users: UsersRepository, secret: string): PassportInstance {
  const passport = new Passport();
  passport.use(
    new LocalStrategy({ usernameField: 'email', passwordField: 'password', session: false }, (email, password, done) => {
      auth.signIn(email, password).then(
        (user) => done(null, user),
        (err) => (err instanceof AuthError ? done(null, false, { message: err.message, kind: err.kind } as never) : done(err)),
      );
    }),
  );
  passport.use(
    new JwtStrategy(
      // Only HS256 with our key: unsigned tokens (alg none) and other algorithms are refused.
      { jwtFromRequest: ExtractJwt.fromAuthHeaderAsBearerToken(), secretOrKey: secret, algorithms: ['HS256'] },
      (claims: { sub: string }, done: (err: unknown, user?: unknown) => void) => {
        users.findById(Number(claims.sub)).then((row) => done(null, row && row.active ? publicUser(row) : false), done);
      },
    ),
  );
  return passport;
}
