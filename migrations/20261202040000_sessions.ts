// Sign-in sessions: refresh tokens (stored hashed, rotated on use, revoked on sign-out)
// and the failed-attempt counter behind the sign-in lock-out.
import type { Knex } from 'knex';

export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('refresh_tokens', (t) => {
    t.bigIncrements('id');
    t.integer('user_id').notNullable().references('users.id').onDelete('CASCADE');
    t.text('token_hash').notNullable().unique();
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.timestamp('expires_at', { useTz: true }).notNullable();
    t.timestamp('revoked_at', { useTz: true });
    t.bigInteger('replaced_by');
  });
  await knex.schema.alterTable('users', (t) => {
    t.integer('failed_sign_ins').notNullable().defaultTo(0);
    t.timestamp('locked_until', { useTz: true });
    t.timestamp('password_changed_at', { useTz: true });
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.alterTable('users', (t) => {
    t.dropColumn('failed_sign_ins');
    t.dropColumn('locked_until');
    t.dropColumn('password_changed_at');
  });
  await knex.schema.dropTableIfExists('refresh_tokens');
}
