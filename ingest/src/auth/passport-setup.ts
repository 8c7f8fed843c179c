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
      (claims: { sub?: unknown; exp?: unknown }, done: (err: unknown, user?: unknown) => void) => {
        // We issue only tokens that expire, for a user id in decimal: anything else is not ours.
        const id = typeof claims.sub === 'string' && /^[1-9]\d{0,9}$/.test(claims.sub) ? Number(claims.sub) : NaN;
        if (!(id <= 2_147_483_647) || typeof claims.exp !== 'number') return done(null, false);
        users.findById(id).then((row) => done(null, row && row.active ? publicUser(row) : false), done);
      },
    ),
  );
  return passport;
}
