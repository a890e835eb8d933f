import type { DeviceClass } from '../schema/device-class.js';
import type { InputIssue } from '../schema/issues.js';
import type { Model } from '../schema/model.js';
import type { Network } from '../schema/network.js';
import { physicalLimitIssues, type Profile } from '../schema/profile.js';
import type { Report } from '../schema/report.js';
import type { Task } from '../schema/task.js';
import type { DocumentRecord } from '../store/documents.js';
import type { RevisionRefs } from '../store/profiles.js';
import type { Store } from '../store/store.js';
import { refuse, type Outcome } from '../schema/refusal.js';
import { validate } from '../validate/index.js';
import type { ShippedNetworks } from './shipped-networks.js';

/** Why a profile cannot be checked: documents it refers to are not stored, or settings the hardware cannot take. */
export type ProfileRefusalCode = 'references-not-stored' | 'physically-impossible';

export interface CheckedProfile {
  report: Report;
  refs: RevisionRefs;
}

/**
 * Looks up the latest task, device class, model and its network a profile refers to, refuses settings
 * the hardware cannot take, and validates the rest. A model that takes its network from its weights is
 * costed from its uploaded weights (`shipped`), and a declared network that does not match them fails the
 * report's network-weights check. Missing references and impossible settings are refusals naming the
 * field; a profile that fails checks is not refused: its report says so.
 */
export function checkProfile(store: Store, shipped: ShippedNetworks, profile: Profile): Outcome<CheckedProfile, ProfileRefusalCode> {
  const found = profileDocuments(store, profile);
  if (!found.ok) return found;
  const { task, deviceClass, model, network } = found.value;
  const report = validate({
    profile,
    task: task.document,
    deviceClass: deviceClass.document,
    model: model.document,
    network: network.document,
    ...shipped.forModel(model.document, network.document),
  });
  // JSON drops what it cannot hold (an infinite blur becomes null): store and return the same thing.
  const stored = JSON.parse(JSON.stringify(report)) as Report;
  return {
    ok: true,
    value: {
      report: stored,
      refs: {
        task: { id: task.id, version: task.version },
        deviceClass: { id: deviceClass.id, version: deviceClass.version },
        model: { id: model.id, version: model.version },
        network: { id: network.id, version: network.version },
      },
    },
  };
}

export interface ProfileDocuments {
  task: DocumentRecord<Task>;
  deviceClass: DocumentRecord<DeviceClass>;
  model: DocumentRecord<Model>;
  network: DocumentRecord<Network>;
}

/**
 * The latest stored task, device class, model and network a profile refers to; missing references and
 * settings the hardware cannot physically take are refusals naming the field.
 */
export function profileDocuments(store: Store, profile: Profile): Outcome<ProfileDocuments, ProfileRefusalCode> {
  const task = store.documents.latest<Task>('task', profile.taskId);
  const deviceClass = store.documents.latest<DeviceClass>('device-class', profile.deviceClassId);
  const model = store.documents.latest<Model>('model', profile.modelId);
  const missing: InputIssue[] = [];
  if (!task) missing.push({ path: 'taskId', message: `no task '${profile.taskId}' is stored` });
  if (!deviceClass) missing.push({ path: 'deviceClassId', message: `no device class '${profile.deviceClassId}' is stored` });
  if (!model) missing.push({ path: 'modelId', message: `no model '${profile.modelId}' is stored` });
  const network = model ? store.documents.latest<Network>('network', model.document.networkId) : null;
  if (model && !network) {
    missing.push({ path: 'modelId', message: `model '${profile.modelId}' refers to network '${model.document.networkId}', which is not stored` });
  }
  if (missing.length > 0 || !task || !deviceClass || !model || !network) {
    return refuse('references-not-stored', 'the profile refers to documents that are not stored', missing);
  }
  const impossible = physicalLimitIssues(profile, deviceClass.document);
  if (impossible.length > 0) {
    return refuse('physically-impossible', `settings device class '${deviceClass.id}' cannot physically take`, impossible);
  }
  return { ok: true, value: { task, deviceClass, model, network } };
}
