import { useEffect, useRef, useState } from 'preact/hooks';
import { ApiError } from '../api.js';
import { useLoad, useSession } from '../context.js';
import { plannedProfile, takePlannedDraft, type PlannedDraft } from '../planned-draft.js';
import { href } from '../router.js';
import type { DeviceClass, Profile, Revision, RevisionSummary, StoredDocument, Task, ValidateAnswer } from '../../../api-client/response-types.js';
import { ErrorNote, Loading, SafetyCaution, StatusBadge } from '../ui/status.js';
import { ProfileForm, type FieldProblem } from './profile-form.js';
import { ProfileReport } from './profile-report.js';
import { ProfileRevisions } from './profile-revisions.js';
import { RenderPreview } from './render-preview.js';

/** Pause after the last keystroke before asking the validator, so typing "0.45" is one request, not three. */
const VALIDATE_PAUSE_MS = 250;

function same(a: Profile, b: Profile): boolean {
  return JSON.stringify(a) === JSON.stringify(b);
}

/** Edit one profile with the validator's verdict beside every change; save as a new revision; compare revisions. */
export function ProfileEditorPage({ profileId }: { profileId: string }) {
  const { api, can } = useSession();
  const latest = useLoad(() => api.get<Revision>(`/profiles/${encodeURIComponent(profileId)}`), [profileId]);
  const revisions = useLoad(() => api.get<RevisionSummary[]>(`/profiles/${encodeURIComponent(profileId)}/revisions`), [profileId]);
  const models = useLoad(() => api.get<Array<StoredDocument<unknown>>>('/models'), []);
  const base = latest.data?.profile;
  const context = useLoad(async () => {
    if (!base) return undefined;
    const [task, deviceClass] = await Promise.all([
      api.get<StoredDocument<Task>>(`/tasks/${encodeURIComponent(base.taskId)}`),
      api.get<StoredDocument<DeviceClass>>(`/device-classes/${encodeURIComponent(base.deviceClassId)}`),
    ]);
    return { task: task.document, deviceClass: deviceClass.document };
  }, [base?.taskId, base?.deviceClassId]);

  const [draft, setDraft] = useState<Profile | null>(null);
  const [answer, setAnswer] = useState<ValidateAnswer['report'] | null>(null);
  const [problems, setProblems] = useState<{ error: Error; issues: FieldProblem[] } | null>(null);
  const [checking, setChecking] = useState(false);
  const [saved, setSaved] = useState<string | null>(null);
  const [saveError, setSaveError] = useState<Error | null>(null);
  const [planned, setPlanned] = useState<PlannedDraft | null>(null);
  const request = useRef(0);

  useEffect(() => {
    if (latest.data) {
      // A candidate handed over by the planner becomes the unsaved draft; the stored report does not describe it.
      const offered = takePlannedDraft(profileId);
      const next = offered ? plannedProfile(latest.data.profile, offered.candidate) : latest.data.profile;
      setPlanned(offered);
      setDraft(next);
      setAnswer(same(next, latest.data.profile) ? latest.data.report : null);
      setProblems(null);
    }
  }, [latest.data]);

  useEffect(() => {
    if (!draft || !base || same(draft, base)) return;
    const n = ++request.current;
    setChecking(true);
    const timer = setTimeout(async () => {
      try {
        const res = await api.send<ValidateAnswer>('POST', '/validate', draft);
        if (n !== request.current) return;
        setAnswer(res.report);
        setProblems(null);
      } catch (err) {
        if (n !== request.current) return;
        setProblems({ error: err as Error, issues: err instanceof ApiError ? err.issues : [] });
      } finally {
        if (n === request.current) setChecking(false);
      }
    }, VALIDATE_PAUSE_MS);
    return () => clearTimeout(timer);
  }, [draft]);

  async function save() {
    if (!draft) return;
    setSaveError(null);
    setSaved(null);
    try {
      const r = await api.send<Revision>('PUT', `/profiles/${encodeURIComponent(profileId)}`, draft);
      setSaved(`Saved as revision ${r.revision} (${r.status}).`);
      latest.reload();
      revisions.reload();
    } catch (err) {
      setSaveError(err as Error);
    }
  }

  if (latest.error) return <ErrorNote error={latest.error} title={`Could not load profile ${profileId}`} />;
  if (!latest.data || !draft) return <Loading what={`profile ${profileId}`} />;
  const changed = !same(draft, latest.data.profile);
  const canSave = can('profiles.update');

  return (
    <section aria-labelledby="profile-title">
      <div class="page-head">
        <p class="crumbs">
          <a href={href({ page: 'profiles' })}>Profiles</a> /
        </p>
        <h1 id="profile-title">
          {latest.data.profile.name ?? profileId} <span class="muted">revision {latest.data.revision}</span>
        </h1>
        <p class="muted">
          <code>{profileId}</code> · task <code>{draft.taskId}</code> · device class <code>{draft.deviceClassId}</code>
          {draft.demoData && <span class="tag">demo data</span>}
        </p>
      </div>
      {planned && changed && (
        <div class="planned-banner">
          <p class="note note-info" role="status">
            Settings of candidate {planned.rank} from the <a href={href({ page: 'planner', taskId: draft.taskId, deviceClassId: draft.deviceClassId })}>planner</a>, not saved
            yet{planned.calibrated ? ' (it ranked them with the fleet\'s calibrated figures; the checks here use the plain estimates)' : ''}. Check them
            below, then save them as revision {latest.data.revision + 1}; robots get them only through a release and a staged rollout.
          </p>
          <SafetyCaution />
        </div>
      )}
      <div class="editor">
        <div class="editor-side">
          <ProfileForm
            draft={draft}
            deviceClass={context.data?.deviceClass}
            modelIds={(models.data ?? []).map((m) => m.id)}
            problems={problems?.issues ?? []}
            readOnly={!canSave}
            onChange={(next) => {
              setSaved(null);
              setDraft(next);
            }}
          />
          <div class="actions">
            {canSave ? (
              <>
                <button type="button" class="btn btn-primary" disabled={!changed || checking || problems !== null} onClick={save}>
                  Save as revision {latest.data.revision + 1}
                </button>
                <button type="button" class="btn" disabled={!changed} onClick={() => setDraft(latest.data!.profile)}>
                  Undo changes
                </button>
              </>
            ) : (
              <p class="muted">Your role can try settings here but not save them.</p>
            )}
          </div>
          {changed && answer && !checking && (
            <p class="muted" role="status">
              Unsaved settings: <StatusBadge status={answer.status} />
            </p>
          )}
          {saved && (
            <p class="note note-ok" role="status">
              {saved}
            </p>
          )}
          <ErrorNote error={saveError} title="Not saved" />
        </div>
        <div class="editor-main">
          {problems && <ErrorNote error={problems.error} title="These settings cannot be checked" />}
          {answer && <ProfileReport report={answer} task={context.data?.task} focusM={draft.camera.focusDistanceM} checking={checking} />}
          <RenderPreview draft={draft} />
        </div>
      </div>
      {revisions.data && <ProfileRevisions profileId={profileId} revisions={revisions.data} />}
    </section>
  );
}
