import { resolve } from 'node:path';
import { isPostgresUrl, openStore, ROLES, type Role } from '../store/index.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';

export const usage = `usage: ocellus token create --role viewer|engineer|operator|admin [--label L] [--data ./ocellus-data]
                           [--database postgres://…] [--json]
  Creates an API token directly in the server's data folder (works while the server runs, or before its
  first start) and prints its secret once; only a hash is kept. Roles: viewer reads; engineer edits device
  classes, networks, models, tasks and profiles; operator also makes releases and manages devices; admin
  also manages tokens. --database (or OCELLUS_DATABASE_URL) names the server's PostgreSQL store.
`;

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(
      args,
      { role: { type: 'string' }, label: { type: 'string' }, data: { type: 'string' }, database: { type: 'string' }, json: { type: 'boolean' }, help: { type: 'boolean' } },
      true,
    );
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (positionals[0] !== 'create' || positionals.length > 1) throw new UsageError(`expected 'token create', got 'token ${positionals.join(' ')}'`);
    const role = values.role;
    if (role === undefined || !(ROLES as readonly string[]).includes(role)) {
      throw new UsageError(`--role must be one of ${ROLES.join(', ')}${role === undefined ? '' : `, got '${role}'`}`);
    }
    const label = (values.label ?? `${role} token`).trim();
    if (label.length === 0 || label.length > 200) throw new UsageError('--label must be 1-200 characters');
    const databaseUrl = values.database ?? io.env.OCELLUS_DATABASE_URL;
    if (databaseUrl !== undefined && !isPostgresUrl(databaseUrl)) throw new UsageError(`--database must be a postgres:// or postgresql:// URL, got '${databaseUrl.slice(0, 40)}'`);
    const store = openStore(resolve(io.cwd, values.data ?? 'ocellus-data'), databaseUrl !== undefined ? { databaseUrl } : {});
    try {
      const at = new Date().toISOString();
      const created = store.transaction(() => {
        const t = store.tokens.create({ role: role as Role, label, actor: 'command line', at });
        store.audit.record({ at, actor: 'command line', action: 'token.create', target: `token/${t.token.id}`, detail: { role, label } });
        return t;
      });
      if (values.json) printJson(io, { token: created.token, secret: created.secret });
      else {
        io.stdout(`${created.secret}\n`);
        io.stderr(`token ${created.token.id} (${role}, "${label}") created; the secret above is shown only once\n`);
      }
      return EXIT_OK;
    } finally {
      store.close();
    }
  });
}
