// Seeds the demo scenario. Idempotent: a second run changes nothing that is there.
import bcrypt from 'bcryptjs';
import type { Knex } from 'knex';
import { lqr } from '../../../shared/src/design/gains';
import { hashDeviceSecret } from '../broker/device-auth';
import { DEFAULT_PARTITIONS, unitPartition } from '../broker/topics';
import { demoDesigns, demoDeviceSecret, demoSites, demoUnits, demoUsers } from './saltmarsh';

/** A discrete-time model for a design revision (dt = 1 s), stored as plain arrays. */
function demoModel(designKey: string, q: number): Record<string, number[][] | number> {
  if (designKey === 'tractor-position') {
    // Constant velocity in x and y: state [x, y, vx, vy]; white-noise acceleration.
    const A = [
      [1, 0, 1, 0],
      [0, 1, 0, 1],
      [0, 0, 1, 0],
      [0, 0, 0, 1],
    ];
    const C = [
      [1, 0, 0, 0],
      [0, 1, 0, 0],
    ];
    const G = [
      [0.5, 0],
      [0, 0.5],
      [1, 0],
      [0, 1],
    ];
    // The tractor's speed controller commands acceleration (B = G, one-second steps) with a
    // state-feedback gain from LQR weights chosen for the demo (position errors 1 m², speed
    // 0.1 (m/s)², effort 1 (m/s²)²): the workbench checks the loop with it.
    const B = G;
    const { K } = lqr(A, B, [[1, 0, 0, 0], [0, 1, 0, 0], [0, 0, 0.1, 0], [0, 0, 0, 0.1]], [[1, 0], [0, 1]]);
    return { A, C, G, Q: [[q, 0], [0, q]], R: [[0.25, 0], [0, 0.25]], B, K, dt: 1 };
  }
  if (designKey === 'cabinet-thermal') {
    return { A: [[0.98]], C: [[1]], G: [[1]], Q: [[q]], R: [[0.04]] };
  }
  return { A: [[1, 0], [0, 1]], C: [[1, 0.05]], G: [[1, 0], [0, 1]], Q: [[q, 0], [0, 1e-8]], R: [[1e-4]] };
}

/** `partitions`: WHITECAP_PARTITIONS; each new unit gets its partition from its key (a unit already there keeps its own). */
export async function seedDemo(knex: Knex, partitions = DEFAULT_PARTITIONS): Promise<{ users: number; units: number; estimators: number }> {
  return knex.transaction(async (trx) => {
    for (const u of demoUsers) {
      const exists = await trx('users').where({ email: u.email }).first('id');
      if (!exists) {
        await trx('users').insert({
          email: u.email,
          display_name: u.displayName,
          role: u.role,
          password_hash: await bcrypt.hash(u.password, 10),
        });
      }
    }
    await trx('sites')
      .insert(demoSites.map((s) => ({ key: s.key, name: s.name, time_zone: s.timeZone })))
      .onConflict('key')
      .ignore();
    const revisionIds = new Map<string, number>();
    for (const d of demoDesigns) {
      await trx('designs').insert({ key: d.key, name: d.name, description: d.description }).onConflict('key').ignore();
      const design = await trx('designs').where({ key: d.key }).first<{ id: number }>('id');
      for (const r of d.revisions) {
        await trx('design_revisions')
          .insert({
            design_id: design.id,
            revision: r.revision,
            status: 'released',
            state_dim: d.stateDim,
            measurement_dim: d.measurementDim,
            model: JSON.stringify(demoModel(d.key, r.q)),
            notes: r.notes,
          })
          .onConflict(['design_id', 'revision'])
          .ignore();
        const rev = await trx('design_revisions')
          .where({ design_id: design.id, revision: r.revision })
          .first<{ id: number }>('id');
        revisionIds.set(`${d.key}#${r.revision}`, rev.id);
      }
    }
    const siteIds = new Map<string, number>(
      (await trx('sites').select<{ id: number; key: string }[]>('id', 'key')).map((s) => [s.key, s.id]),
    );
    let estimators = 0;
    for (const unit of demoUnits) {
      await trx('units')
        .insert({ key: unit.key, name: unit.name, kind: unit.kind, site_id: siteIds.get(unit.site), partition: unitPartition(unit.key, partitions) })
        .onConflict('key')
        .ignore();
      const row = await trx('units').where({ key: unit.key }).first<{ id: number }>('id');
      for (const e of unit.estimators) {
        await trx('estimators')
          .insert({
            unit_id: row.id,
            key: e.key,
            design_revision_id: revisionIds.get(`${e.design}#${e.revision}`),
            measurement_dim: e.measurementDim,
            expected_interval_ms: 1000,
          })
          .onConflict(['unit_id', 'key'])
          .ignore();
        estimators += 1;
      }
      await trx('device_credentials')
        .insert({ unit_id: row.id, username: unit.key, secret_hash: hashDeviceSecret(demoDeviceSecret(unit.key)) })
        .onConflict('username')
        .ignore();
    }
    // The demo's watch rota: the on-call engineer every day from 08:00 port time, the
    // administrator next in line.
    if (!(await trx('watch_rotas').whereNull('site_id').first('id'))) {
      const idOf = async (email: string) => Number((await trx('users').where({ email }).first<{ id: number }>('id')).id);
      const responder = await idOf('responder@saltmarsh.example');
      const admin = await idOf('admin@saltmarsh.example');
      await trx('watch_rotas').insert({
        name: DEMO_ROTA_NAME,
        site_id: null,
        time_zone: 'Europe/Amsterdam',
        shifts: JSON.stringify([1, 2, 3, 4, 5, 6, 7].map((weekday) => ({ weekday, handover: '08:00', userId: responder }))),
        backups: JSON.stringify([admin]),
      });
    }
    return { users: demoUsers.length, units: demoUnits.length, estimators };
  });
}

export const DEMO_ROTA_NAME = 'Saltmarsh Terminal watch';
