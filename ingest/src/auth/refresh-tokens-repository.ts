import type { Knex } from 'knex';

export interface RefreshTokenRow {
  id: number;
  user_id: number;
  token_hash: string;
  expires_at: Date;
  revoked_at: Date | null;
  replaced_by: number | null;
}

export class RefreshTokensRepository {
  constructor(private readonly knex: Knex) {}

  async insert(userId: number, tokenHash: string, expiresAt: Date): Promise<number> {
    const [row] = await this.knex('refresh_tokens').insert({ user_id: userId, token_hash: tokenHash, expires_at: expiresAt }).returning('id');
    return Number(row.id);
  }

  find(tokenHash: string): Promise<RefreshTokenRow | undefined> {
    return this.knex<RefreshTokenRow>('refresh_tokens').where({ token_hash: tokenHash }).first();
  }

  async revoke(id: number, replacedBy: number | null = null): Promise<void> {
    await this.knex('refresh_tokens').where({ id }).whereNull('revoked_at').update({ revoked_at: this.knex.fn.now(), replaced_by: replacedBy });
  }

  async revokeAllOf(userId: number): Promise<void> {
    await this.knex('refresh_tokens').where({ user_id: userId }).whereNull('revoked_at').update({ revoked_at: this.knex.fn.now() });
  }
}
