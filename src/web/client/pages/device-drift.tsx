import { dateTime, duration, num } from '../format.js';
import type { DriftEpisode } from '../../../api-client/response-types.js';

const QUANTITY: Record<DriftEpisode['quantity'], string> = { latency: 'inference time', energy: 'inference energy' };

/**
 * Episodes where this unit's measured ÷ predicted ratio left the rest of its class's by more than the
 * tolerance: a hint of a worn or differently built unit, or one running hot. Newest first.
 */
export function DeviceDrift({ episodes }: { episodes: DriftEpisode[] }) {
  return (
    <section class="panel drift" aria-labelledby="drift-title">
      <h2 id="drift-title">Drift from its class</h2>
      {episodes.length === 0 ? (
        <p class="muted">No drift episodes: this unit's measured inference time and energy follow the rest of its class.</p>
      ) : (
        <ul class="plain drift-list">
          {episodes.map((d) => {
            const open = d.clearedAt === null;
            const ratio = d.classFactor !== 0 ? d.deviceFactor / d.classFactor : null;
            return (
              <li data-drift={d.quantity} data-open={open ? 'true' : 'false'}>
                <span class={`badge ${open ? 'badge-warn' : 'badge-other'}`}>
                  <span aria-hidden="true" class="badge-icon">
                    {open ? '!' : '✓'}
                  </span>
                  {open ? 'drifting' : 'cleared'}
                </span>{' '}
                <strong>{QUANTITY[d.quantity]}</strong> ×{num(ratio)} of its class (measured ÷ predicted: this unit {num(d.deviceFactor)}, the rest of the
                class {num(d.classFactor)}; tolerance {num(d.tolerance * 100)} %) <span class="muted small">since {dateTime(d.onsetAt)}</span>
                {!open && (
                  <span class="muted small">
                    {' '}
                    until {dateTime(d.clearedAt)} ({duration(new Date(d.clearedAt!).getTime() - new Date(d.onsetAt).getTime())})
                  </span>
                )}
              </li>
            );
          })}
        </ul>
      )}
    </section>
  );
}
