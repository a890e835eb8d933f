import type { ContentfulStatusCode } from 'hono/utils/http-status';
import type { CalibratedReportRefusalCode } from '../fleet/calibration/calibrated-report.js';
import type { AssignRefusalCode } from '../fleet/rollout/assign.js';
import type { RolloutRefusalCode } from '../fleet/rollout/service.js';
import type { ReleaseRefusalCode } from '../release/build.js';
import type { ReissueRefusalCode } from '../release/reissue.js';
import type { TokenRefusalCode } from '../access/api-tokens.js';
import type { DocumentSaveRefusalCode } from '../documents/save.js';
import type { WeightsUploadRefusalCode } from '../documents/weights.js';
import type { EnrolmentRefusalCode } from '../fleet/enrolment/credentials.js';
import type { ProfileDiffRefusalCode } from '../profiles/diff.js';
import type { ProfileSaveRefusalCode } from '../profiles/save.js';
import type { PreviewRefusalCode } from '../profiles/preview.js';
import type { Outcome, Refusal } from '../schema/refusal.js';
import { HttpError } from './errors.js';

export type RefusalCode =
  | ReleaseRefusalCode
  | ReissueRefusalCode
  | ProfileSaveRefusalCode
  | ProfileDiffRefusalCode
  | PreviewRefusalCode
  | DocumentSaveRefusalCode
  | WeightsUploadRefusalCode
  | EnrolmentRefusalCode
  | TokenRefusalCode
  | AssignRefusalCode
  | RolloutRefusalCode
  | CalibratedReportRefusalCode;

/**
 * The one place a domain refusal becomes an HTTP status (RFC 9110 §15): input naming something that is not
 * there or cannot be, 400; the thing addressed by the path is missing, 404; a clash with what is stored, 409;
 * well-formed but refused on its content (failed checks), 422; a body larger than allowed, 413. A new code does not compile until it is here.
 */
const STATUS_OF: Record<RefusalCode, ContentfulStatusCode> = {
  'unknown-device-class': 400,
  'revisions-not-stored': 400,
  'revisions-unfit': 409,
  'checks-failed': 422,
  'references-not-stored': 400,
  'physically-impossible': 400,
  'device-not-found': 404,
  'release-not-found': 400,
  'class-mismatch': 409,
  'not-found': 404,
  invalid: 400,
  conflict: 409,
  'missing-document': 409,
  'reissue-source-not-found': 404,
  'weights-missing': 409,
  'profile-exists': 409,
  'profile-not-found': 404,
  'revision-not-found': 404,
  'document-exists': 409,
  'document-not-found': 404,
  'model-not-found': 404,
  'weights-too-large': 413,
  'weights-mismatch': 400,
  'device-enrolled': 409,
  'token-not-found': 404,
  'image-too-large': 413,
  'image-unreadable': 400,
};

/** The HTTP error for a refusal: its status from the table, its message and issues, its detail as extra fields. */
export function refusalError(r: Refusal<RefusalCode>): HttpError {
  return new HttpError(STATUS_OF[r.code], r.message, { issues: r.issues, ...(r.detail ? { extra: r.detail } : {}) });
}

/** The value of an outcome, or its refusal thrown as the HTTP error. */
export function unwrap<T>(outcome: Outcome<T, RefusalCode>): T {
  if (!outcome.ok) throw refusalError(outcome);
  return outcome.value;
}
