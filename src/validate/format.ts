import type { Check, Report } from '../schema/index.js';

const STATUS_WORD: Record<Check['status'], string> = { pass: 'ok  ', warn: 'WARN', fail: 'FAIL' };

/** One line per check: status, code, message, and the profile field it points at. */
export function formatCheck(check: Check): string {
  return `  ${STATUS_WORD[check.status]}  ${check.code.padEnd(20)} ${check.message}  [${check.path}]`;
}

/** Plain-text rendering of a report, as the CLI prints it. */
export function formatReport(report: Report, title?: string): string {
  const counts = { pass: 0, warn: 0, fail: 0 };
  for (const c of report.checks) counts[c.status]++;
  const verdict = report.status === 'pass' ? 'passes' : report.status === 'warn' ? 'passes with warnings' : 'FAILS';
  const head = `${title ? `${title}: ` : ''}${verdict} (${counts.pass} ok, ${counts.warn} warnings, ${counts.fail} failures)`;
  return [head, ...report.checks.map(formatCheck)].join('\n') + '\n';
}
