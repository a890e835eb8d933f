import { describeIssue, type InputIssue } from '../schema/index.js';
import type { CatalogIssue } from './types.js';

/** One line for a person: "file:line:column: message" for a text error, "file: path: message" for a field. */
export function describeCatalogIssue(issue: CatalogIssue): string {
  if (issue.line !== undefined) return `${issue.file}:${issue.line}:${issue.column ?? 1}: ${issue.message}`;
  return `${issue.file}: ${describeIssue(issue)}`;
}

/** The issue without its file, for an error that names the file once (keeps the line/column of a text error). */
export function withoutFile({ file: _file, ...issue }: CatalogIssue): InputIssue {
  return issue;
}
