import type { Knex } from 'knex';

export type Role = 'viewer' | 'responder' | 'designer' | 'admin';

export interface UserRow {
  id: number;
  email: string;
  display_name: string;
  role: Role;
  password_hash: string;
  active: boolean;
}

export class UsersRepository {
  constructor(private readonly knex: Knex) {}

  findByEmail(email: string): Promise<UserRow | undefined> {
    return this.knex<UserRow>('users').whereRaw('lower(email) = lower(?)', [email]).first();
  }

  findById(id: number): Promise<UserRow | undefined> {
    return this.knex<UserRow>('users').where({ id }).first();
  }
}
