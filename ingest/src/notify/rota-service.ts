// The watch rota as people see and edit it: who is on watch now and next, validated
// changes (the shared rota rules, plus: the people exist, the site exists).
import type { PersonRef, RotaInput, RotaOverrideInput, RotaSummary } from '../../../shared/src/api/api-types';
import { handoffChain, nextHandovers, onWatchAt, validateWatchRota, type IsoWeekday, type WatchRota } from '../../../shared/src/rota/watch-rota';
import type { Clock } from '../clock';
import { HttpProblem } from '../http/problem';
import type { NotifyRepository, StoredRota } from './notify-repository';

function invalid(detail: string, errors: { path: string; message: string }[]): HttpProblem {
  return new HttpProblem(400, 'invalid-rota', 'Invalid watch rota', detail, { errors });
}

export class RotaService {
  constructor(
    private readonly repo: NotifyRepository,
    private readonly clock: Clock,
  ) {}

  async list(): Promise<RotaSummary[]> {
    const [rotas, people, sites] = await Promise.all([this.repo.rotas(), this.repo.people(), this.repo.siteNames()]);
    return rotas.map((r) => this.summary(r, people, sites));
  }

  async get(id: number): Promise<RotaSummary> {
    const rota = await this.repo.rota(id);
    if (!rota) throw new HttpProblem(404, 'not-found', 'No such rota', `There is no watch rota ${id}.`);
    const [people, sites] = await Promise.all([this.repo.people(), this.repo.siteNames()]);
    return this.summary(rota, people, sites);
  }

  async create(input: RotaInput): Promise<RotaSummary> {
    await this.check(input, null);
    try {
      return this.get(await this.repo.createRota(input));
    } catch (err) {
      throw conflictOr(err);
    }
  }

  async update(id: number, input: RotaInput): Promise<RotaSummary> {
    await this.check(input, id);
    try {
      if (!(await this.repo.updateRota(id, input))) throw new HttpProblem(404, 'not-found', 'No such rota', `There is no watch rota ${id}.`);
    } catch (err) {
      throw conflictOr(err);
    }
    return this.get(id);
  }

  async remove(id: number): Promise<void> {
    if (!(await this.repo.deleteRota(id))) throw new HttpProblem(404, 'not-found', 'No such rota', `There is no watch rota ${id}.`);
  }

  async addOverride(id: number, input: RotaOverrideInput, createdBy: number): Promise<RotaSummary> {
    const rota = await this.repo.rota(id);
    if (!rota) throw new HttpProblem(404, 'not-found', 'No such rota', `There is no watch rota ${id}.`);
    const fromMs = Date.parse(input.from);
    const toMs = Date.parse(input.to);
    const errors: { path: string; message: string }[] = [];
    if (!Number.isFinite(fromMs)) errors.push({ path: 'from', message: 'must be a date and time' });
    if (!Number.isFinite(toMs)) errors.push({ path: 'to', message: 'must be a date and time' });
    if (errors.length === 0 && toMs <= fromMs) errors.push({ path: 'to', message: 'must be after the start' });
    if (errors.length === 0 && toMs - fromMs > 90 * 86_400_000) errors.push({ path: 'to', message: 'an override lasts at most 90 days' });
    const person = (await this.repo.people([input.userId])).get(input.userId);
    if (!person || !person.active) errors.push({ path: 'userId', message: 'no such active user' });
    if (errors.length > 0) throw invalid(`${errors[0].path}: ${errors[0].message}`, errors);
    await this.repo.addOverride(id, { fromMs, toMs, userId: input.userId, note: input.note?.trim() || null, createdBy });
    return this.get(id);
  }

  async removeOverride(id: number, overrideId: number): Promise<RotaSummary> {
    if (!(await this.repo.deleteOverride(id, overrideId))) {
      throw new HttpProblem(404, 'not-found', 'No such override', `Rota ${id} has no override ${overrideId}.`);
    }
    return this.get(id);
  }

  private async check(input: RotaInput, id: number | null): Promise<void> {
    const rota: WatchRota = {
      id: id ?? 0,
      name: input.name,
      scope: input.siteId === null ? { kind: 'fleet' } : { kind: 'site', siteId: input.siteId },
      timeZone: input.timeZone,
      shifts: input.shifts.map((s) => ({ ...s, weekday: s.weekday as IsoWeekday })),
      backups: input.backups,
      overrides: [],
    };
    const v = validateWatchRota(rota);
    // Paths as the request body spells them: shifts.2.handover (the rota rules say shifts[2].handover).
    const errors = v.ok ? [] : v.issues.map((i) => ({ path: i.path.replace(/\[(\d+)\]/g, '.$1'), message: i.message }));
    const ids = [...new Set([...input.shifts.map((s) => s.userId), ...input.backups])];
    const people = await this.repo.people(ids);
    for (const uid of ids) {
      const p = people.get(uid);
      if (!p || !p.active) errors.push({ path: 'userId', message: `user ${uid} does not exist or is not active` });
    }
    if (input.siteId !== null && !(await this.repo.siteExists(input.siteId))) errors.push({ path: 'siteId', message: `there is no site ${input.siteId}` });
    if (errors.length > 0) throw invalid(`${errors[0].path}: ${errors[0].message}`, errors);
  }

  private summary(r: StoredRota, people: Map<number, { displayName: string }>, sites: Map<number, string>): RotaSummary {
    const now = this.clock.now();
    const ref = (userId: number): PersonRef => ({ userId, displayName: people.get(userId)?.displayName ?? `user ${userId}` });
    const iso = (ms: number | null) => (ms === null ? null : new Date(ms).toISOString());
    let onWatch: RotaSummary['onWatch'] = null;
    let next: RotaSummary['next'] = [];
    let chain: PersonRef[] = [];
    try {
      const w = onWatchAt(r, now);
      onWatch = { ...ref(w.userId), since: iso(w.shiftStartMs), until: iso(w.shiftEndMs), source: w.source };
      next = nextHandovers(r, now, 5).map((h) => ({ ...ref(h.userId), at: new Date(h.atMs).toISOString() }));
      chain = handoffChain(r, now).map(ref);
    } catch {
      // An invalid stored rota (a person deleted since): shown with nobody on watch.
    }
    return {
      id: r.id,
      name: r.name,
      scope: r.scope.kind === 'fleet' ? { kind: 'fleet' } : { kind: 'site', siteId: r.scope.siteId, siteName: sites.get(r.scope.siteId) ?? `site ${r.scope.siteId}` },
      timeZone: r.timeZone,
      shifts: r.shifts.map((s) => ({ ...ref(s.userId), weekday: s.weekday, handover: s.handover })),
      backups: r.backups.map(ref),
      overrides: r.overrides.map((o) => ({ ...ref(o.userId), id: o.id, from: new Date(o.fromMs).toISOString(), to: new Date(o.toMs).toISOString(), note: o.note ?? null })),
      onWatch,
      next,
      handoffChain: chain,
    };
  }
}

function conflictOr(err: unknown): unknown {
  if ((err as { code?: string }).code === '23505') {
    return new HttpProblem(409, 'rota-scope-taken', 'Rota exists', 'There is already a watch rota for this scope (one for the whole fleet, one per site).');
  }
  return err;
}
