// Device credentials: each unit signs in to the broker with its own username and secret.
// Secrets are 32 random bytes issued by Whitecap, so a fast SHA-256 digest is a sound way
// to store them (there is no low-entropy password to brute-force); compared in constant time.
import { createHash, randomBytes, timingSafeEqual } from 'node:crypto';
import type { Knex } from 'knex';

export function hashDeviceSecret(secret: string): string {
  return createHash('sha256').update(secret, 'utf8').digest('hex');
}

export function newDeviceSecret(): string {
  return randomBytes(32).toString('base64url');
}

export function secretMatches(secret: string, storedHash: string): boolean {
  const a = Buffer.from(hashDeviceSecret(secret), 'hex');
  const b = Buffer.from(storedHash, 'hex');
  return a.length === b.length && timingSafeEqual(a, b);
}

/** The unit key a username and secret sign in as, or null. */
export async function authenticateDevice(knex: Knex, username: string, secret: string): Promise<string | null> {
  const row = await knex('device_credentials as c')
    .join('units as u', 'u.id', 'c.unit_id')
    .where('c.username', username)
    .whereNull('c.revoked_at')
    .first<{ unit_key: string; secret_hash: string } | undefined>('u.key as unit_key', 'c.secret_hash');
  if (!row) return null;
  return secretMatches(secret, row.secret_hash) ? row.unit_key : null;
}
