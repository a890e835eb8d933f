import type { ComponentChildren } from 'preact';

export type CheckStatus = 'pass' | 'warn' | 'fail';

const STATUS_TEXT: Record<CheckStatus, { icon: string; label: string }> = {
  pass: { icon: '✓', label: 'pass' },
  warn: { icon: '!', label: 'warn' },
  fail: { icon: '✕', label: 'fail' },
};

/** A check's status as an icon and a word as well as a colour, so it reads without colour vision. */
export function StatusBadge({ status }: { status: CheckStatus | string }) {
  const known = (STATUS_TEXT as Record<string, { icon: string; label: string }>)[status];
  const t = known ?? { icon: '•', label: status };
  return (
    <span class={`badge badge-${known ? status : 'other'}`}>
      <span aria-hidden="true" class="badge-icon">
        {t.icon}
      </span>
      {t.label}
    </span>
  );
}

export function OnlineBadge({ online }: { online: boolean | null }) {
  if (online === null) return <span class="badge badge-other">unknown</span>;
  return online ? (
    <span class="badge badge-online">
      <span aria-hidden="true" class="badge-icon">●</span>online
    </span>
  ) : (
    <span class="badge badge-offline">
      <span aria-hidden="true" class="badge-icon">○</span>offline
    </span>
  );
}

export function ErrorNote({ error, title }: { error: Error | undefined | null; title?: string }) {
  if (!error) return null;
  const issues = (error as { issues?: Array<{ path: string; message: string }> }).issues ?? [];
  return (
    <div class="note note-error" role="alert">
      <strong>{title ?? 'The server refused'}:</strong> {error.message}
      {issues.length > 0 && (
        <ul>
          {issues.map((i) => (
            <li>
              <code>{i.path}</code> {i.message}
            </li>
          ))}
        </ul>
      )}
    </div>
  );
}

/** The standing caution wherever the console changes settings on robots. */
export function SafetyCaution({ children }: { children?: ComponentChildren }) {
  return (
    <aside class="note note-caution" aria-label="Safety caution">
      <strong>
        <span aria-hidden="true">⚠ </span>Settings change what the robot sees.
      </strong>{' '}
      Try a release on one unit first, roll out in stages, let robots apply it only in safe states (apply policy “when-idle”), and follow the
      site's risk assessment, robot safety standards and local regulations. The figures here are thin-lens and roofline estimates, not a
      safety certification.
      {children}
    </aside>
  );
}

export function Loading({ what }: { what: string }) {
  return (
    <p class="muted" role="status">
      Loading {what}…
    </p>
  );
}
