import { num, unitText } from '../format.js';
import type { Check } from '../../../api-client/response-types.js';
import { StatusBadge } from './status.js';

const ORDER = { fail: 0, warn: 1, pass: 2 } as const;

/** Focuses the editor field a check points at, when there is one. */
function focusField(path: string) {
  const el = document.getElementById(`field-${path}`) ?? document.getElementById(`field-${path.split('.')[0]}`);
  el?.focus();
}

/** A field path that may wrap after each dot (camera.<wbr>focusDistanceM) in a narrow column. */
function breakAtDots(path: string) {
  const parts = path.split('.');
  return parts.flatMap((part, i) => (i < parts.length - 1 ? [`${part}.`, <wbr />] : [part]));
}

/** The validator's checks as a table: failures first, each with its figure, its limit and the field to change. */
export function ChecksTable({ checks }: { checks: Check[] }) {
  const sorted = [...checks].sort((a, b) => ORDER[a.status] - ORDER[b.status]);
  const counts = { pass: 0, warn: 0, fail: 0 };
  for (const c of checks) counts[c.status] += 1;
  return (
    <div>
      <p class="muted" aria-live="polite">
        {counts.fail} failing, {counts.warn} warning, {counts.pass} passing
      </p>
      <div class="table-wrap checks-wrap">
        <table class="grid checks" aria-label="Validation checks">
          <thead>
            <tr>
              <th scope="col">Status</th>
              <th scope="col">Check</th>
              <th scope="col" class="numeric">Figure</th>
              <th scope="col" class="numeric">Limit</th>
              <th scope="col">Field</th>
              <th scope="col">What it found</th>
            </tr>
          </thead>
          <tbody>
            {sorted.map((c) => (
              <tr class={`check-${c.status}`} data-check={c.code} data-status={c.status}>
                <td>
                  <StatusBadge status={c.status} />
                </td>
                <th scope="row">
                  <code>{c.code}</code>
                </th>
                <td class="numeric" data-label="Figure">
                  {num(c.actual)} {c.actual !== null ? unitText(c.unit) : ''}
                </td>
                <td class="numeric" data-label="Limit">
                  {num(c.limit)} {c.limit !== null ? unitText(c.unit) : ''}
                </td>
                <td class="check-field" data-label="Field">
                  {c.path ? (
                    <button type="button" class="link" onClick={() => focusField(c.path)} title="Go to this field">
                      {breakAtDots(c.path)}
                    </button>
                  ) : (
                    '—'
                  )}
                </td>
                <td class="message" data-label="What it found">
                  {c.message}
                </td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
    </div>
  );
}
