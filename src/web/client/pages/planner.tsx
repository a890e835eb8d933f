import { useEffect, useState } from 'preact/hooks';
import { useLoad, useSession } from '../context.js';
import { href } from '../router.js';
import type { DeviceClass, PlanAnswer, RevisionSummary, StoredDocument, Task } from '../../../api-client/response-types.js';
import { ErrorNote, Loading } from '../ui/status.js';
import { PlannerResults } from './planner-results.js';

interface ModelDoc {
  precision: string;
  name?: string;
}

interface Props {
  taskId: string | undefined;
  deviceClassId: string | undefined;
}

/** Weight-buffer step the planner uses unless told otherwise (src/plan/types.ts). */
const DEFAULT_GRANULE_KIB = 64;

/**
 * Search the settings of a task on a device class on the server and show what it found: the candidates no
 * other beats on energy, accuracy and latency together, or why none is feasible. A candidate opens in the
 * profile editor as an unsaved revision; nothing reaches a robot from here.
 */
export function PlannerPage({ taskId, deviceClassId }: Props) {
  const { api, can } = useSession();
  const docs = useLoad(
    () =>
      Promise.all([
        api.get<Array<StoredDocument<Task>>>('/tasks'),
        api.get<Array<StoredDocument<DeviceClass>>>('/device-classes'),
        api.get<Array<StoredDocument<ModelDoc>>>('/models'),
        api.get<RevisionSummary[]>('/profiles'),
      ]),
    [],
  );
  const [left, setLeft] = useState<Set<string>>(new Set());
  const [granuleKib, setGranuleKib] = useState(DEFAULT_GRANULE_KIB);
  const [nearMisses, setNearMisses] = useState(0);
  const [running, setRunning] = useState(false);
  const [answer, setAnswer] = useState<PlanAnswer | null>(null);
  const [error, setError] = useState<Error | null>(null);

  // A new task or device class is a new question: the old answer no longer applies.
  useEffect(() => {
    setAnswer(null);
    setError(null);
    setLeft(new Set());
  }, [taskId, deviceClassId]);

  if (docs.error) return <ErrorNote error={docs.error} title="Could not load tasks and device classes" />;
  if (!docs.data) return <Loading what="tasks and device classes" />;
  const [tasks, classes, models, profiles] = docs.data;
  const task = tasks.find((t) => t.id === taskId) ?? tasks[0];
  const deviceClass = classes.find((c) => c.id === deviceClassId) ?? classes[0];
  if (!task || !deviceClass) return <p class="muted">The planner needs at least one task and one device class; none are stored yet.</p>;
  const precision = deviceClass.document.accelerator.precision;
  const usable = models.filter((m) => m.document.precision === precision);
  const chosen = usable.filter((m) => !left.has(m.id)).map((m) => m.id);
  const targets = profiles.filter((p) => p.profile.taskId === task.id && p.profile.deviceClassId === deviceClass.id);
  const go = (t: string, c: string) => {
    location.hash = href({ page: 'planner', taskId: t, deviceClassId: c });
  };
  const mayRun = can('plan');

  async function search(e: Event) {
    e.preventDefault();
    setRunning(true);
    setError(null);
    try {
      const body = {
        taskId: task!.id,
        deviceClassId: deviceClass!.id,
        ...(left.size > 0 ? { modelIds: chosen } : {}),
        options: { granuleKib, ...(nearMisses > 0 ? { nearMisses } : {}) },
      };
      setAnswer(await api.send<PlanAnswer>('POST', '/plan', body));
    } catch (err) {
      setAnswer(null);
      setError(err as Error);
    } finally {
      setRunning(false);
    }
  }

  return (
    <section aria-labelledby="planner-title">
      <div class="page-head">
        <h1 id="planner-title">Planner</h1>
        <p class="muted">
          Searches focus, f-number, exposure, analog gain, model and memory split for a task on a device class, and lists the candidates that pass
          every check and that no other candidate beats on energy per frame, predicted accuracy and latency together.
        </p>
      </div>
      <form class="panel planner-form" onSubmit={search} aria-label="What to search">
        <div class="filters">
          <div class="field">
            <label for="plan-task">Task</label>
            <select id="plan-task" value={task.id} onChange={(e) => go(e.currentTarget.value, deviceClass.id)}>
              {tasks.map((t) => (
                <option value={t.id}>{t.document.name ? `${t.document.name} (${t.id})` : t.id}</option>
              ))}
            </select>
          </div>
          <div class="field">
            <label for="plan-class">Device class</label>
            <select id="plan-class" value={deviceClass.id} onChange={(e) => go(task.id, e.currentTarget.value)}>
              {classes.map((c) => (
                <option value={c.id}>{c.document.name ? `${c.document.name} (${c.id})` : c.id}</option>
              ))}
            </select>
          </div>
          <div class="field">
            <label for="plan-granule">
              Weight-buffer step <span class="unit">(KiB)</span>
            </label>
            <input id="plan-granule" type="number" min={8} step={8} value={granuleKib} onInput={(e) => Number.isFinite(e.currentTarget.valueAsNumber) && setGranuleKib(e.currentTarget.valueAsNumber)} />
          </div>
          <div class="field">
            <label for="plan-misses">Near misses to list as well</label>
            <input id="plan-misses" type="number" min={0} max={50} step={1} value={nearMisses} onInput={(e) => Number.isFinite(e.currentTarget.valueAsNumber) && setNearMisses(e.currentTarget.valueAsNumber)} />
          </div>
        </div>
        <fieldset class="field inline-radios">
          <legend>
            Models ({precision}, the accelerator's precision{models.length > usable.length ? `; ${models.length - usable.length} of other precisions left out` : ''})
          </legend>
          {usable.length === 0 && <span class="muted">No stored model runs {precision}.</span>}
          {usable.map((m) => (
            <label>
              <input
                type="checkbox"
                checked={!left.has(m.id)}
                onChange={(e) => {
                  const next = new Set(left);
                  if (e.currentTarget.checked) next.delete(m.id);
                  else next.add(m.id);
                  setLeft(next);
                }}
              />
              {m.id}
            </label>
          ))}
        </fieldset>
        <div class="actions">
          {mayRun ? (
            <button type="submit" class="btn btn-primary" disabled={running || chosen.length === 0}>
              {running ? 'Searching…' : 'Search settings'}
            </button>
          ) : (
            <p class="muted">Searching takes the engineer role or above: one search costs the server up to about a second of computing.</p>
          )}
          {running && (
            <span class="muted" role="status">
              searching on the server, up to about a second…
            </span>
          )}
        </div>
      </form>
      <ErrorNote error={error} title="The search was refused" />
      {answer && answer.refs.task.id === task.id && answer.refs.deviceClass.id === deviceClass.id && (
        <PlannerResults answer={answer} task={task.document} targets={targets} canEdit={can('profiles.update')} />
      )}
    </section>
  );
}
