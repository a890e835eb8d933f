import type { DeviceClass, Model, Network, Profile, Task } from '../../schema/index.js';
import { refuse, type Refusal } from '../../schema/refusal.js';
import type { Store } from '../../store/store.js';
import { validate, type Calibration, type ValidationReport } from '../../validate/index.js';
import { createCalibrator, type ClassCalibration } from './calibrator.js';

export type CalibratedReport =
  | {
      ok: true;
      profileId: string;
      revision: number;
      deviceClassId: string;
      /** The calibration handed to the validator; null while the class has too little telemetry. */
      calibration: Calibration | null;
      fit: ClassCalibration;
      report: ValidationReport;
    }
  | Refusal<CalibratedReportRefusalCode>;

/** Why no calibrated report can be made: the profile revision is not stored, or a document it was validated against is gone. */
export type CalibratedReportRefusalCode = 'not-found' | 'missing-document';

/**
 * Validates a stored profile revision again with its device class's fitted calibration, against the exact
 * document versions the revision was first validated with. Without enough telemetry the report is the
 * uncalibrated one, and `calibration` is null.
 */
export function calibratedReport(store: Store, profileId: string, revision?: number): CalibratedReport {
  const rev = revision === undefined ? store.profiles.latest<Profile>(profileId) : store.profiles.revision<Profile>(profileId, revision);
  if (!rev) return refuse('not-found', `profile '${profileId}'${revision === undefined ? '' : ` revision ${revision}`} not found`);
  const { refs } = rev;
  const task = store.documents.version<Task>('task', refs.task.id, refs.task.version);
  const deviceClass = store.documents.version<DeviceClass>('device-class', refs.deviceClass.id, refs.deviceClass.version);
  const model = store.documents.version<Model>('model', refs.model.id, refs.model.version);
  const network = store.documents.version<Network>('network', refs.network.id, refs.network.version);
  if (!task || !deviceClass || !model || !network) {
    return refuse('missing-document', `a document revision ${rev.revision} of '${profileId}' was validated against is no longer stored`);
  }
  const calibrator = createCalibrator(store);
  const fit = calibrator.deviceClass(deviceClass.id);
  const calibration = calibrator.forValidator(deviceClass.id);
  const report = validate(
    { profile: rev.profile, task: task.document, deviceClass: deviceClass.document, model: model.document, network: network.document },
    calibration ? { calibration } : {},
  );
  return { ok: true, profileId, revision: rev.revision, deviceClassId: deviceClass.id, calibration, fit, report: JSON.parse(JSON.stringify(report)) as ValidationReport };
}
