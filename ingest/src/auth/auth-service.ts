// Sign-in and sessions. Passwords are bcrypt hashes (bcryptjs, pure JS). A session is a
// short-lived signed access token (JWT, HS256) plus a long-lived refresh token kept in an
// httpOnly cookie; refresh tokens are random, stored as SHA-256 digests, rotated on every
// use, and revoked on sign-out. Presenting a refresh token that was already rotated or
// revoked revokes every session of that user (it was stolen or replayed).
// Repeated failed sign-ins lock the account for a while.
import { createHash, randomBytes } from 'node:crypto';
import bcrypt from 'bcryptjs';
import jwt from 'jsonwebtoken';
import type { Role, User } from '../../../shared/src/api/api-types';
import type { RefreshTokensRepository } from './refresh-tokens-repository';
import type { UserRow, UsersRepository } from './users-repository';

export type PublicUser = User;

export interface AccessTokenClaims {
  sub: string;
  role: Role;
}

export function publicUser(row: UserRow): User {
  return {
    id: row.id,
    email: row.email,
    displayName: row.display_name,
    role: row.role,
    active: row.active,
    createdAt: row.created_at ? new Date(row.created_at).toISOString() : undefined,
  };
}

export class AuthError extends Error {
  constructor(
    readonly kind: 'bad-credentials' | 'locked' | 'session-expired' | 'weak-password',
    message: string,
  ) {
    super(message);
  }
}

/**
 * Words that the most common leaked passwords are made of: a password that is one of them with
 * digits or symbols around it ("Password123!", "qwerty2024") is among the first an attacker tries.
 */
const COMMON_PASSWORD_WORDS = new Set([
  'password', 'passw0rd', 'p@ssw0rd', 'qwerty', 'qwertyuiop', 'qwertz', 'azerty', 'asdfghjkl', 'zxcvbnm', 'letmein', 'welcome',
  'admin', 'administrator', 'changeme', 'iloveyou', 'trustno1', 'monkey', 'dragon', 'football', 'baseball', 'sunshine',
  'princess', 'master', 'secret', 'login', 'whitecap', 'qazwsx', '1qaz2wsx', '1q2w3e4r', '1q2w3e4r5t', 'abc', 'abcd', '1234567890', '0987654321',
]);

/**
 * The password policy: 10 to 200 characters; not the e-mail address; at least 5 different
 * characters (no "aaaaaaaaaa", "abababababab"); not a run like "0123456789" or "abcdefghij";
 * not a common password word with digits or symbols around it.
 */
export function passwordProblem(password: string, email = ''): string | null {
  if (password.length < 10) return 'must be at least 10 characters long';
  if (password.length > 200) return 'must be at most 200 characters long';
  const lower = password.toLowerCase();
  if (email && (lower === email.toLowerCase() || lower === email.toLowerCase().split('@')[0])) return 'must not be the e-mail address';
  if (/^(.)\1*$/.test(password)) return 'must not be one character repeated';
  if (new Set(password).size < 5) return 'must use at least 5 different characters';
  const codes = [...lower].map((c) => c.codePointAt(0)!);
  const step = codes[1] - codes[0];
  if (Math.abs(step) === 1 && codes.every((c, i) => i === 0 || c - codes[i - 1] === step)) return 'must not be a run of consecutive characters';
  const word = lower.replace(/^[^a-z]+|[^a-z]+$/g, '');
  if (COMMON_PASSWORD_WORDS.has(word) || COMMON_PASSWORD_WORDS.has(lower)) {
    return 'must not be a common password';
  }
  return null;
}

const sha256 = (s: string) => createHash('sha256').update(s).digest('hex');

// A fixed hash to compare against when the e-mail is unknown, so that both paths take as long.
const UNKNOWN_USER_HASH = bcrypt.hashSync('unknown-user-placeholder', 10);

export interface AuthSettings {
  secret: string;
  accessTtlSeconds: number;
  refreshTtlSeconds: number;
  lockAfterFailures: number;
  lockMs: number;
}

export class AuthService {
  constructor(
    private readonly users: UsersRepository,
    private readonly refreshTokens: RefreshTokensRepository,
    private readonly settings: AuthSettings,
  ) {}

  /** The user for these credentials; throws AuthError when they do not match an active, unlocked account. */
  async signIn(email: string, password: string): Promise<User> {
    const row = await this.users.findByEmail(email);
    const ok = await bcrypt.compare(password, row?.password_hash ?? UNKNOWN_USER_HASH);
    if (row && row.locked_until && row.locked_until.getTime() > Date.now()) {
      throw new AuthError('locked', 'Too many failed sign-ins: this account is locked for a few minutes.');
    }
    if (!row || !row.active || !ok) {
      if (row) await this.users.recordFailure(row.id, this.settings.lockAfterFailures, this.settings.lockMs);
      throw new AuthError('bad-credentials', 'That e-mail and password do not match an active account.');
    }
    if (row.failed_sign_ins > 0) await this.users.recordSuccess(row.id);
    return publicUser(row);
  }

  issueAccessToken(user: User): { accessToken: string; expiresIn: number } {
    const claims: AccessTokenClaims = { sub: String(user.id), role: user.role };
    const accessToken = jwt.sign(claims, this.settings.secret, { algorithm: 'HS256', expiresIn: this.settings.accessTtlSeconds });
    return { accessToken, expiresIn: this.settings.accessTtlSeconds };
  }

  async issueRefreshToken(userId: number): Promise<{ token: string; id: number; maxAgeMs: number }> {
    const token = randomBytes(32).toString('base64url');
    const maxAgeMs = this.settings.refreshTtlSeconds * 1000;
    const id = await this.refreshTokens.insert(userId, sha256(token), new Date(Date.now() + maxAgeMs));
    return { token, id, maxAgeMs };
  }

  /** Exchanges a refresh token for a new session (the old token stops working). */
  async refresh(token: string): Promise<{ user: User; refresh: { token: string; maxAgeMs: number } }> {
    const row = await this.refreshTokens.find(sha256(token));
    if (!row) throw new AuthError('session-expired', 'Your session has ended; sign in again.');
    if (row.revoked_at) {
      // A used or revoked token presented again: end every session of this user.
      await this.refreshTokens.revokeAllOf(row.user_id);
      throw new AuthError('session-expired', 'Your session has ended; sign in again.');
    }
    if (row.expires_at.getTime() <= Date.now()) throw new AuthError('session-expired', 'Your session has expired; sign in again.');
    const userRow = await this.users.findById(row.user_id);
    if (!userRow || !userRow.active) {
      await this.refreshTokens.revoke(row.id);
      throw new AuthError('session-expired', 'This account is no longer active.');
    }
    const next = await this.issueRefreshToken(userRow.id);
    await this.refreshTokens.revoke(row.id, next.id);
    return { user: publicUser(userRow), refresh: next };
  }

  async signOut(token: string | undefined): Promise<void> {
    if (!token) return;
    const row = await this.refreshTokens.find(sha256(token));
    if (row) await this.refreshTokens.revoke(row.id);
  }

  async changePassword(userId: number, current: string, next: string): Promise<void> {
    const row = await this.users.findById(userId);
    if (!row || !(await bcrypt.compare(current, row.password_hash))) {
      throw new AuthError('bad-credentials', 'The current password is not right.');
    }
    const problem = passwordProblem(next, row.email);
    if (problem) throw new AuthError('weak-password', `The new password ${problem}.`);
    await this.users.update(userId, { password_hash: await bcrypt.hash(next, 10) });
    await this.refreshTokens.revokeAllOf(userId);
  }

  static hashPassword(password: string): Promise<string> {
    return bcrypt.hash(password, 10);
  }
}
