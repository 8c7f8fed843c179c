// Sign-in: e-mail and password checked against the bcrypt hash, then a short-lived
// signed access token (JWT, HS256).
import bcrypt from 'bcryptjs';
import jwt from 'jsonwebtoken';
import type { Role, UserRow, UsersRepository } from './users-repository';

export interface PublicUser {
  id: number;
  email: string;
  displayName: string;
  role: Role;
}

export interface AccessTokenClaims {
  sub: string;
  role: Role;
}

export function publicUser(row: UserRow): PublicUser {
  return { id: row.id, email: row.email, displayName: row.display_name, role: row.role };
}

// A fixed hash to compare against when the e-mail is unknown, so that both paths take as long.
const UNKNOWN_USER_HASH = bcrypt.hashSync('unknown-user-placeholder', 10);

export class AuthService {
  constructor(
    private readonly users: UsersRepository,
    private readonly secret: string,
    private readonly accessTtlSeconds: number,
  ) {}

  /** The user for these credentials, or null when they do not match an active account. */
  async verifyPassword(email: string, password: string): Promise<PublicUser | null> {
    const row = await this.users.findByEmail(email);
    const ok = await bcrypt.compare(password, row?.password_hash ?? UNKNOWN_USER_HASH);
    return row && row.active && ok ? publicUser(row) : null;
  }

  issueAccessToken(user: PublicUser): { accessToken: string; expiresIn: number } {
    const claims: AccessTokenClaims = { sub: String(user.id), role: user.role };
    const accessToken = jwt.sign(claims, this.secret, { algorithm: 'HS256', expiresIn: this.accessTtlSeconds });
    return { accessToken, expiresIn: this.accessTtlSeconds };
  }
}
