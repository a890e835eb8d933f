import { useLoad, useSession } from '../context.js';
import { href } from '../router.js';
import type { DeviceClass, RevisionSummary, StoredDocument, Task } from '../../../api-client/response-types.js';
import { ErrorNote, Loading, StatusBadge } from '../ui/status.js';

/** Profiles laid out by task (rows) and device class (columns), each with its latest revision's verdict. */
export function ProfilesPage() {
  const { api, can } = useSession();
  const data = useLoad(
    () =>
      Promise.all([
        api.get<RevisionSummary[]>('/profiles'),
        api.get<Array<StoredDocument<Task>>>('/tasks'),
        api.get<Array<StoredDocument<DeviceClass>>>('/device-classes'),
      ]),
    [],
  );
  if (data.error) return <ErrorNote error={data.error} title="Could not load profiles" />;
  if (!data.data) return <Loading what="profiles" />;
  const [profiles, tasks, classes] = data.data;
  const taskIds = [...new Set([...tasks.map((t) => t.id), ...profiles.map((p) => p.profile.taskId)])].sort();
  const classIds = [...new Set([...classes.map((c) => c.id), ...profiles.map((p) => p.profile.deviceClassId)])].sort();
  const taskName = (id: string) => tasks.find((t) => t.id === id)?.document.name ?? id;
  const className = (id: string) => classes.find((c) => c.id === id)?.document.name ?? id;

  return (
    <section aria-labelledby="profiles-title">
      <div class="page-head">
        <h1 id="profiles-title">Profiles</h1>
        <p class="muted">
          {profiles.length} profiles for {taskIds.length} tasks on {classIds.length} device classes. Open one to edit it with live checks.
        </p>
      </div>
      <div class="table-wrap">
        <table class="grid matrix" aria-label="Profiles by task and device class">
          <thead>
            <tr>
              <th scope="col">Task</th>
              {classIds.map((c) => (
                <th scope="col" title={className(c)}>
                  {c}
                </th>
              ))}
            </tr>
          </thead>
          <tbody>
            {taskIds.map((t) => (
              <tr>
                <th scope="row">
                  {taskName(t)}
                  <div class="muted small">
                    <code>{t}</code>
                  </div>
                </th>
                {classIds.map((c) => {
                  const here = profiles.filter((p) => p.profile.taskId === t && p.profile.deviceClassId === c);
                  return (
                    <td>
                      {here.length === 0 && <span class="muted">none</span>}
                      <ul class="plain">
                        {here.map((p) => (
                          <li>
                            <a href={href({ page: 'profile', profileId: p.profileId })}>{p.profileId}</a> <span class="muted small">rev {p.revision}</span>{' '}
                            <StatusBadge status={p.status} />
                          </li>
                        ))}
                      </ul>
                      {can('plan') && (
                        <a class="small" href={href({ page: 'planner', taskId: t, deviceClassId: c })} aria-label={`Search settings for ${t} on ${c}`}>
                          search settings
                        </a>
                      )}
                    </td>
                  );
                })}
              </tr>
            ))}
          </tbody>
        </table>
      </div>
    </section>
  );
}
