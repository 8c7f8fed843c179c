import type { Knex } from 'knex';
import type { Role } from '../../../shared/src/api/api-types';

export type { Role };

export interface UserRow {
  id: number;
  email: string;
  display_name: string;
  role: Role;
  password_hash: string;
  active: boolean;
  created_at: Date;
  failed_sign_ins: number;
  locked_until: Date | null;
}

export interface UserListQuery {
  q?: string;
  role?: Role;
  active?: boolean;
  sort: 'email' | 'displayName' | 'role' | 'createdAt';
  order: 'asc' | 'desc';
  limit: number;
  offset: number;
}

const SORT_COLUMNS: Record<UserListQuery['sort'], string> = {
  email: 'email',
  displayName: 'display_name',
  role: 'role',
  createdAt: 'created_at',
};

export class UsersRepository {
  constructor(private readonly knex: Knex) {}

  findByEmail(email: string): Promise<UserRow | undefined> {
    return this.knex<UserRow>('users').whereRaw('lower(email) = lower(?)', [email]).first();
  }

  findById(id: number): Promise<UserRow | undefined> {
    return this.knex<UserRow>('users').where({ id }).first();
  }

  async list(q: UserListQuery): Promise<{ total: number; rows: UserRow[] }> {
    const base = this.knex<UserRow>('users');
    if (q.q) {
      const like = `%${escapeLike(q.q)}%`;
      base.where((w) => w.whereILike('email', like).orWhereILike('display_name', like));
    }
    if (q.role) base.where('role', q.role);
    if (q.active !== undefined) base.where('active', q.active);
    const [{ count }] = await base.clone().count<{ count: string }[]>('* as count');
    const rows = await base.orderBy(SORT_COLUMNS[q.sort], q.order).orderBy('id').limit(q.limit).offset(q.offset).select('*');
    return { total: Number(count), rows };
  }

  async insert(u: { email: string; displayName: string; role: Role; passwordHash: string }): Promise<UserRow> {
    const [row] = await this.knex<UserRow>('users')
      .insert({ email: u.email, display_name: u.displayName, role: u.role, password_hash: u.passwordHash })
      .returning('*');
    return row;
  }

  async update(id: number, patch: Partial<Pick<UserRow, 'display_name' | 'role' | 'active' | 'password_hash'>>): Promise<UserRow | undefined> {
    const [row] = await this.knex<UserRow>('users').where({ id }).update(patch).returning('*');
    return row;
  }

  async recordFailure(id: number, lockAfter: number, lockMs: number): Promise<void> {
    await this.knex('users')
      .where({ id })
      .update({
        failed_sign_ins: this.knex.raw('failed_sign_ins + 1'),
        locked_until: this.knex.raw(`case when failed_sign_ins + 1 >= ? then now() + (? * interval '1 millisecond') else locked_until end`, [lockAfter, lockMs]),
      });
  }

  async recordSuccess(id: number): Promise<void> {
    await this.knex('users').where({ id }).update({ failed_sign_ins: 0, locked_until: null });
  }
}

/** A user's text inside a LIKE pattern matches literally. */
export function escapeLike(s: string): string {
  return s.replace(/[\\%_]/g, (c) => `\\${c}`);
}
