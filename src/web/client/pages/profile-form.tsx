import type { DeviceClass, Profile } from '../../../api-client/response-types.js';

export interface FieldProblem {
  path: string;
  message: string;
}

interface Props {
  draft: Profile;
  deviceClass: DeviceClass | undefined;
  modelIds: string[];
  problems: FieldProblem[];
  readOnly: boolean;
  onChange(next: Profile): void;
}

type NumberPath = 'camera.focusDistanceM' | 'camera.fNumber' | 'camera.exposureUs' | 'camera.analogGain' | 'memory.weightBufferKib' | 'memory.activationBufferKib';

function read(p: Profile, path: NumberPath): number {
  const [group, key] = path.split('.') as ['camera' | 'memory', string];
  return (p[group] as Record<string, number>)[key]!;
}

function write(p: Profile, path: NumberPath, value: number): Profile {
  const [group, key] = path.split('.') as ['camera' | 'memory', string];
  return { ...p, [group]: { ...p[group], [key]: value } };
}

function problemFor(problems: FieldProblem[], path: string): string | undefined {
  return problems.find((i) => i.path === path || (path.startsWith('memory') && i.path === 'memory'))?.message;
}

function NumberField(props: { path: NumberPath; label: string; unit: string; step: string; min?: number | undefined; max?: number | undefined; hint?: string | undefined } & Props) {
  const { path, draft, problems, readOnly, onChange } = props;
  const id = `field-${path}`;
  const problem = problemFor(problems, path);
  return (
    <div class="field">
      <label for={id}>
        {props.label} <span class="unit">({props.unit})</span>
      </label>
      <input
        id={id}
        type="number"
        inputMode="decimal"
        step={props.step}
        min={props.min}
        max={props.max}
        value={read(draft, path)}
        readOnly={readOnly}
        aria-invalid={problem ? 'true' : undefined}
        aria-describedby={problem ? `${id}-problem` : props.hint ? `${id}-hint` : undefined}
        onInput={(e) => {
          const v = e.currentTarget.valueAsNumber;
          if (Number.isFinite(v)) onChange(write(draft, path, v));
        }}
      />
      {props.hint && !problem && (
        <span class="hint" id={`${id}-hint`}>
          {props.hint}
        </span>
      )}
      {problem && (
        <span class="field-problem" id={`${id}-problem`}>
          <span aria-hidden="true">✕ </span>
          {problem}
        </span>
      )}
    </div>
  );
}

/** The settings of one profile: camera, accelerator memory split, model. Every change goes to the validator. */
export function ProfileForm(props: Props) {
  const { draft, deviceClass, modelIds, readOnly, onChange } = props;
  const stops = deviceClass?.lens.fNumberStops ?? [];
  const stopList = stops.includes(draft.camera.fNumber) ? stops : [...stops, draft.camera.fNumber].sort((a, b) => a - b);
  const fProblem = problemFor(props.problems, 'camera.fNumber');
  return (
    <form class="profile-form" onSubmit={(e) => e.preventDefault()} aria-label="Profile settings">
      <fieldset>
        <legend>Camera</legend>
        <NumberField {...props} path="camera.focusDistanceM" label="Focus distance" unit="m" step="0.001" min={deviceClass?.lens.nearestFocusM} hint={deviceClass ? `nearest ${deviceClass.lens.nearestFocusM} m` : undefined} />
        <div class="field">
          <label for="field-camera.fNumber">
            Aperture <span class="unit">(f-number)</span>
          </label>
          <select
            id="field-camera.fNumber"
            value={String(draft.camera.fNumber)}
            disabled={readOnly}
            aria-invalid={fProblem ? 'true' : undefined}
            onChange={(e) => onChange({ ...draft, camera: { ...draft.camera, fNumber: Number(e.currentTarget.value) } })}
          >
            {stopList.map((s) => (
              <option value={String(s)}>f/{s}</option>
            ))}
          </select>
          {fProblem && (
            <span class="field-problem">
              <span aria-hidden="true">✕ </span>
              {fProblem}
            </span>
          )}
        </div>
        <NumberField {...props} path="camera.exposureUs" label="Exposure" unit="µs" step="50" min={1} />
        <NumberField {...props} path="camera.analogGain" label="Analog gain" unit="×" step="0.1" min={1} max={deviceClass?.sensor.maxAnalogGain} hint={deviceClass ? `1 to ${deviceClass.sensor.maxAnalogGain}×` : undefined} />
      </fieldset>
      <fieldset>
        <legend>Accelerator memory</legend>
        <NumberField {...props} path="memory.weightBufferKib" label="Weight buffer" unit="KiB" step="64" min={0} />
        <NumberField {...props} path="memory.activationBufferKib" label="Activation buffer" unit="KiB" step="64" min={0} hint={deviceClass ? `the two share ${deviceClass.accelerator.sramKib} KiB` : undefined} />
      </fieldset>
      <fieldset>
        <legend>Model and notes</legend>
        <div class="field">
          <label for="field-modelId">Model</label>
          <select id="field-modelId" value={draft.modelId} disabled={readOnly} onChange={(e) => onChange({ ...draft, modelId: e.currentTarget.value })}>
            {(modelIds.includes(draft.modelId) ? modelIds : [draft.modelId, ...modelIds]).map((m) => (
              <option value={m}>{m}</option>
            ))}
          </select>
        </div>
        <div class="field wide">
          <label for="field-notes">Notes</label>
          <textarea id="field-notes" rows={3} readOnly={readOnly} value={draft.notes ?? ''} onInput={(e) => onChange({ ...draft, notes: e.currentTarget.value })} />
        </div>
      </fieldset>
    </form>
  );
}
