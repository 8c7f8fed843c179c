import { z } from 'zod';
import type { Page, User } from '../../../shared/src/api/api-types';
import { AuthService, passwordProblem, publicUser } from '../auth/auth-service';
import type { UsersRepository } from '../auth/users-repository';
import { HttpProblem } from '../http/problem';
import { idParam, paging, route, text, type RouteDef } from '../http/route-table';

const role = z.enum(['viewer', 'responder', 'designer', 'admin']);
const createBody = z.object({
  email: z.email().max(320),
  displayName: z.string().trim().min(1).max(120),
  role,
  password: z.string().max(200),
});
const patchBody = z
  .object({ displayName: z.string().trim().min(1).max(120).optional(), role: role.optional(), active: z.boolean().optional() })
  .refine((b) => Object.keys(b).length > 0, 'send at least one of displayName, role, active');

export function usersRoutes(users: UsersRepository): RouteDef[] {
  return [
    route({
      method: 'get',
      path: '/users',
      ability: 'administer',
      tag: 'users',
      summary: 'Users and their roles',
      query: z.object({
        q: text(100).optional(),
        role: role.optional(),
        sort: z.enum(['email', 'displayName', 'role', 'createdAt']).default('email'),
        ...paging,
      }),
      handler: async ({ query }): Promise<Page<User>> => {
        const { total, rows } = await users.list(query);
        return { total, limit: query.limit, offset: query.offset, items: rows.map(publicUser) };
      },
    }),
    route({
      method: 'post',
      path: '/users',
      ability: 'administer',
      tag: 'users',
      summary: 'Create a user with a role and a first password',
      body: createBody,
      status: 201,
      handler: async ({ body }) => {
        const problem = passwordProblem(body.password, body.email);
        if (problem) throw new HttpProblem(400, 'weak-password', 'Password not accepted', `The password ${problem}.`);
        if (await users.findByEmail(body.email)) throw new HttpProblem(409, 'conflict', 'Already exists', `A user with e-mail ${body.email} exists.`);
        const row = await users.insert({ email: body.email, displayName: body.displayName, role: body.role, passwordHash: await AuthService.hashPassword(body.password) });
        return publicUser(row);
      },
    }),
    route({
      method: 'patch',
      path: '/users/:id',
      ability: 'administer',
      tag: 'users',
      summary: 'Change a user\'s role, name, or deactivate them',
      params: idParam,
      body: patchBody,
      handler: async ({ params, body, user }) => {
        if (params.id === user.id && (body.active === false || (body.role && body.role !== 'admin'))) {
          throw new HttpProblem(409, 'conflict', 'Not on yourself', 'You cannot deactivate yourself or take away your own admin role.');
        }
        const row = await users.update(params.id, { display_name: body.displayName, role: body.role, active: body.active });
        if (!row) throw new HttpProblem(404, 'not-found', 'No such user', `There is no user ${params.id}.`);
        return publicUser(row);
      },
    }),
  ];
}
