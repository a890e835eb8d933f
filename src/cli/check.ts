import { existsSync } from 'node:fs';
import { join } from 'node:path';
import { describeCatalogIssue, loadCatalog, mergeCatalogs, profilesOf, resolveProfile } from '../document-files/index.js';
import type { CatalogIssue } from '../document-files/index.js';
import type { Check, CheckStatus } from '../schema/index.js';
import { formatReport, validate } from '../validate/index.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_BAD_INPUT, EXIT_CHECK_FAILED, EXIT_OK } from './io.js';
import { withShippedNetwork } from './shipped-network.js';
import type { CliIo } from './io.js';

/** Folder whose documents are always available for resolving references, when it exists. */
export const DEFAULT_CATALOG_FOLDER = 'profiles';

export const usage = `usage: ocellus check <files or folders...> [--json]
  Validates every profile found under the given paths. References (taskId, deviceClassId, modelId and the
  model's networkId) resolve among all documents under the given paths, then under ./${DEFAULT_CATALOG_FOLDER}
  when that folder exists. A model with networkFrom "weights" is costed from its weightsFile (ONNX), and a
  declared network that disagrees with that file is a failing check. Exit 0 when every check passes (warnings allowed), 1 when a check fails,
  2 when a file is bad or a reference is missing.
  JSON keys: profiles[{file, profile, status, checks[{code, status, actual, limit, unit, path, message}]}], issues[{file, path, message}]
`;

interface ProfileResult {
  file: string;
  profile: string;
  status: CheckStatus;
  checks: Check[];
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(args, { json: { type: 'boolean' }, help: { type: 'boolean' } }, true);
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (positionals.length === 0) throw new UsageError('give at least one file or folder to check');
    const given = await loadCatalog(positionals, { cwd: io.cwd });
    const catalog = existsSync(join(io.cwd, DEFAULT_CATALOG_FOLDER))
      ? mergeCatalogs(given, await loadCatalog([DEFAULT_CATALOG_FOLDER], { cwd: io.cwd }))
      : given;
    const issues: CatalogIssue[] = [...catalog.issues];
    const results: ProfileResult[] = [];
    for (const { file, profile } of profilesOf(given)) {
      const resolved = resolveProfile(catalog, profile, file);
      if (!resolved.ok) {
        issues.push(...resolved.issues);
        continue;
      }
      const report = validate(await withShippedNetwork(catalog, resolved.value, io.cwd));
      results.push({ file, profile: profile.id, status: report.status, checks: report.checks });
    }
    if (results.length === 0 && issues.length === 0) {
      throw new UsageError(`no profiles found under ${positionals.join(', ')}`);
    }
    if (values.json) {
      printJson(io, { profiles: results, issues });
    } else {
      for (const r of results) io.stdout(formatReport({ status: r.status, checks: r.checks }, `${r.file} (profile ${r.profile})`) + '\n');
      const count = (s: CheckStatus) => results.filter((r) => r.status === s).length;
      io.stdout(`${results.length} profiles: ${count('pass')} pass, ${count('warn')} pass with warnings, ${count('fail')} fail\n`);
    }
    if (issues.length > 0) {
      io.stderr(`${issues.length} input problem${issues.length === 1 ? '' : 's'}:\n${issues.map(describeCatalogIssue).join('\n')}\n`);
      return EXIT_BAD_INPUT;
    }
    return results.some((r) => r.status === 'fail') ? EXIT_CHECK_FAILED : EXIT_OK;
  });
}
