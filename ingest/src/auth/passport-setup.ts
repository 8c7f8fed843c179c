// Passport strategies: `local` (e-mail and password, for sign-in) and `jwt` (the bearer
// access token on every other API call).
import { Passport } from 'passport';
import { ExtractJwt, Strategy as JwtStrategy } from 'passport-jwt';
import { Strategy as LocalStrategy } from 'passport-local';
import type { AuthService } from './auth-service';
import { publicUser } from './auth-service';
import type { UsersRepository } from './users-repository';

export function createPassport(auth: AuthService, users: UsersRepository, secret: string): InstanceType<typeof Passport> {
  const passport = new Passport();
  passport.use(
    new LocalStrategy({ usernameField: 'email', passwordField: 'password', session: false }, (email, password, done) => {
      auth.verifyPassword(email, password).then((user) => done(null, user ?? false), done);
    }),
  );
  passport.use(
    new JwtStrategy(
      { jwtFromRequest: ExtractJwt.fromAuthHeaderAsBearerToken(), secretOrKey: secret, algorithms: ['HS256'] },
      (claims: { sub: string }, done: (err: unknown, user?: unknown) => void) => {
        users.findById(Number(claims.sub)).then((row) => done(null, row && row.active ? publicUser(row) : false), done);
      },
    ),
  );
  return passport;
}
