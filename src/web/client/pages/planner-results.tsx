import { useState } from 'preact/hooks';
import { FrontPlot } from '../charts/front-plot.js';
import { focusDistanceM, focusText, num, unitText } from '../format.js';
import { offerPlannedDraft } from '../planned-draft.js';
import { href } from '../router.js';
import type { Candidate, NearMiss, PlanAnswer, RevisionSummary, Task } from '../../../api-client/response-types.js';
import { SafetyCaution, StatusBadge } from '../ui/status.js';

interface Props {
  answer: PlanAnswer;
  task: Task;
  /** Profiles of this task on this device class: a candidate opens as a new revision of one of them. */
  targets: RevisionSummary[];
  canEdit: boolean;
}

function range(values: number[], unit: string): string {
  if (values.length === 0) return 'none';
  const lo = Math.min(...values);
  const hi = Math.max(...values);
  return lo === hi ? `${num(lo)} ${unit}` : `${num(lo)}–${num(hi)} ${unit} (${values.length} steps)`;
}

function SearchSummary({ answer }: { answer: PlanAnswer }) {
  const s = answer.searched;
  const c = answer.calibration;
  return (
    <div class="plan-summary">
      <p>
        <strong>{answer.evaluated.toLocaleString('en-GB')}</strong> candidates evaluated over {s.modelIds.length} model{s.modelIds.length === 1 ? '' : 's'};{' '}
        <strong>{answer.front.length}</strong> on the front.
      </p>
      <p class="muted small">
        Focus {s.focusDistancesM.map(focusText).join(', ')} · f-numbers {s.fNumbers.map((f) => `f/${f}`).join(' ')} · exposure{' '}
        {range(s.exposuresUs, 'µs')} · gain {range(s.analogGains, '×')} · {s.memoryPartitions.length} memory splits
      </p>
      <p class="muted small" data-calibration={c ? 'applied' : 'none'}>
        {c
          ? `Inference time and energy scaled by the fleet's measurements of this device class (×${num(c.latencyFactor)} time, ×${num(c.energyFactor)} energy, from ${c.samples} telemetry windows). The editor's checks use the plain estimates.`
          : 'Plain estimates: the fleet has not yet sent enough telemetry from this device class to calibrate them.'}
      </p>
      {answer.skipped.map((k) => (
        <p class="muted small">Left out: {k.reason}</p>
      ))}
      {answer.unconfirmed > 0 && (
        <p class="note note-caution">
          {answer.unconfirmed} candidates the fast search found feasible failed the validator and were left out; the front may be incomplete.
        </p>
      )}
    </div>
  );
}

function ConstraintList({ answer, title }: { answer: PlanAnswer; title: string }) {
  if (answer.bindingConstraints.length === 0) return null;
  return (
    <div>
      <h3>{title}</h3>
      <ul class="plain constraints">
        {answer.bindingConstraints.slice(0, 8).map((code) => {
          const n = answer.failCounts[code];
          return (
            <li data-constraint={code}>
              <code>{code}</code>
              {n !== undefined && answer.evaluated > 0 && (
                <span class="muted small">
                  {' '}
                  fails {n.toLocaleString('en-GB')} of {answer.evaluated.toLocaleString('en-GB')} ({Math.round((100 * n) / answer.evaluated)} %)
                </span>
              )}
            </li>
          );
        })}
      </ul>
    </div>
  );
}

const settingsText = (c: Candidate) =>
  `${c.modelId}, focus ${focusText(c.camera.focusDistanceM)}, f/${c.camera.fNumber}, ${num(c.camera.exposureUs)} µs, gain ${num(c.camera.analogGain)}×, ` +
  `${c.memory.weightBufferKib} + ${c.memory.activationBufferKib} KiB`;

function NearMisses({ misses }: { misses: NearMiss[] }) {
  if (misses.length === 0) return null;
  return (
    <div>
      <h3>Nearest misses</h3>
      <ol class="near-misses">
        {misses.map((m) => (
          <li data-near-miss={m.candidate.modelId}>
            <div>{settingsText(m.candidate)}</div>
            <ul class="plain">
              {m.failing.map((f) => (
                <li>
                  <StatusBadge status={f.status} /> <code>{f.code}</code>{' '}
                  <span class="muted small">
                    {num(f.actual)} against {num(f.limit)} {unitText(f.unit)}: {f.message}
                  </span>
                </li>
              ))}
            </ul>
          </li>
        ))}
      </ol>
    </div>
  );
}

/** The answer of one search: the front as a chart and a table, or why nothing is feasible. */
export function PlannerResults({ answer, task, targets, canEdit }: Props) {
  const [selected, setSelected] = useState<number | null>(null);
  const [targetId, setTargetId] = useState(targets[0]?.profileId ?? '');
  const target = targets.find((t) => t.profileId === targetId) ?? targets[0];

  function open(index: number) {
    if (!target) return;
    offerPlannedDraft(target.profileId, { candidate: answer.front[index]!, rank: index + 1, calibrated: answer.calibration !== null });
    location.hash = href({ page: 'profile', profileId: target.profileId });
  }

  return (
    <section class="plan-results" aria-labelledby="plan-results-title">
      <h2 id="plan-results-title">What the search found</h2>
      <SearchSummary answer={answer} />
      {answer.front.length === 0 ? (
        <div class="note note-fail" role="status">
          <strong>
            <span aria-hidden="true">✕ </span>No candidate meets every check.
          </strong>{' '}
          The checks below fail most often; loosen the task or try other models or another device class.
        </div>
      ) : (
        <div class="plan-overview">
          <FrontPlot front={answer.front} nearMisses={answer.nearMisses.map((n) => n.candidate)} minAccuracy={task.minAccuracy} selected={selected} onSelect={setSelected} />
          <div>
            {canEdit && (
              <div class="panel">
                <h3>Open a candidate in the editor</h3>
                {target ? (
                  <>
                    {targets.length > 1 ? (
                      <div class="field">
                        <label for="plan-target">As a new revision of</label>
                        <select id="plan-target" value={target.profileId} onChange={(e) => setTargetId(e.currentTarget.value)}>
                          {targets.map((t) => (
                            <option value={t.profileId}>
                              {t.profileId} (revision {t.revision})
                            </option>
                          ))}
                        </select>
                      </div>
                    ) : (
                      <p>
                        Opens as an unsaved revision {target.revision + 1} of <code>{target.profileId}</code>.
                      </p>
                    )}
                    <p class="muted small">The editor checks the settings again; saving stores a revision. Robots get it only through a release and a staged rollout.</p>
                  </>
                ) : (
                  <p class="muted">No profile of this task on this device class is stored yet; create one first, then open candidates into it.</p>
                )}
              </div>
            )}
            <ConstraintList answer={answer} title="Checks that ruled out the most candidates" />
          </div>
        </div>
      )}
      {canEdit && answer.front.length > 0 && <SafetyCaution />}
      {answer.front.length > 0 && (
        <div class="table-wrap">
          <table class="grid compact plan-front" aria-label="Candidates on the front">
            <thead>
              <tr>
                <th scope="col" class="numeric">#</th>
                <th scope="col">Model</th>
                <th scope="col" class="numeric">
                  Energy <span class="th-unit">mJ/frame</span>
                </th>
                <th scope="col" class="numeric">Accuracy</th>
                <th scope="col" class="numeric">
                  Latency <span class="th-unit">ms</span>
                </th>
                <th scope="col" class="numeric">
                  Worst blur <span class="th-unit">px</span>
                </th>
                <th scope="col" class="numeric">
                  Focus <span class="th-unit">m</span>
                </th>
                <th scope="col" class="numeric nowrap">f-number</th>
                <th scope="col" class="numeric">
                  Exposure <span class="th-unit">µs</span>
                </th>
                <th scope="col" class="numeric">Gain</th>
                <th scope="col" class="numeric">
                  Weights + activations <span class="th-unit">KiB</span>
                </th>
                {canEdit && <th scope="col"><span class="visually-hidden">Action</span></th>}
              </tr>
            </thead>
            <tbody>
              {answer.front.map((c, i) => (
                <tr data-candidate={i + 1} class={selected === i ? 'selected' : undefined} onClick={() => setSelected(i)}>
                  <td class="numeric">{i + 1}</td>
                  <th scope="row">
                    <code>{c.modelId}</code>
                  </th>
                  <td class="numeric">{num(c.energyMjPerFrame)}</td>
                  <td class="numeric">{num(c.predictedAccuracy)}</td>
                  <td class="numeric">{num(c.latencyMs)}</td>
                  <td class="numeric">{num(c.worstBlurPx)}</td>
                  <td class="numeric">{num(focusDistanceM(c.camera.focusDistanceM))}</td>
                  <td class="numeric">f/{c.camera.fNumber}</td>
                  <td class="numeric">{num(c.camera.exposureUs)}</td>
                  <td class="numeric">{num(c.camera.analogGain)}×</td>
                  <td class="numeric">
                    {c.memory.weightBufferKib} + {c.memory.activationBufferKib}
                  </td>
                  {canEdit && (
                    <td>
                      <button type="button" class="btn btn-small" disabled={!target} onClick={() => open(i)} aria-label={`Open candidate ${i + 1} in the editor`}>
                        Open in editor
                      </button>
                    </td>
                  )}
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      )}
      {answer.front.length === 0 && <ConstraintList answer={answer} title="Binding constraints" />}
      <NearMisses misses={answer.nearMisses} />
    </section>
  );
}
