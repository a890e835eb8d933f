import { createCalibrator } from '../../fleet/calibration/calibrator.js';
import { plan } from '../../plan/index.js';
import { createShippedNetworks } from '../../profiles/shipped-networks.js';
import type { ModelCandidate, PlanOptions } from '../../plan/index.js';
import type { DeviceClass } from '../../schema/device-class.js';
import type { InputIssue } from '../../schema/issues.js';
import type { Model } from '../../schema/model.js';
import type { Network } from '../../schema/network.js';
import type { Task } from '../../schema/task.js';
import type { DocumentRecord } from '../../store/documents.js';
import type { Store } from '../../store/store.js';
import type { ResolvedDeps } from '../context.js';
import { badRequest } from '../errors.js';
import { planRequestSchema, type PlanRequest } from './plan-request.js';
import { requestBody, type Router } from '../routing.js';

/** A guard against a runaway grid on a shared server: well above what the console's options can ask for. */
export const API_MAX_PLAN_CANDIDATES = 20_000_000;

type Ref = { id: string; version: number };
const ref = (d: DocumentRecord<unknown>): Ref => ({ id: d.id, version: d.version });

interface PlanDocuments {
  task: DocumentRecord<Task>;
  deviceClass: DocumentRecord<DeviceClass>;
  candidates: Array<{ model: DocumentRecord<Model>; network: DocumentRecord<Network> }>;
}

/** The latest stored documents a plan request names; a 400 naming each missing reference. */
function planDocuments(store: Store, body: PlanRequest): PlanDocuments {
  const task = store.documents.latest<Task>('task', body.taskId);
  const deviceClass = store.documents.latest<DeviceClass>('device-class', body.deviceClassId);
  const issues: InputIssue[] = [];
  if (!task) issues.push({ path: 'taskId', message: `no task '${body.taskId}' is stored` });
  if (!deviceClass) issues.push({ path: 'deviceClassId', message: `no device class '${body.deviceClassId}' is stored` });

  let models: Array<DocumentRecord<Model>>;
  if (body.modelIds) {
    models = [];
    body.modelIds.forEach((id, i) => {
      const m = store.documents.latest<Model>('model', id);
      if (m) models.push(m);
      else issues.push({ path: `modelIds[${i}]`, message: `no model '${id}' is stored` });
    });
  } else {
    const precision = deviceClass?.document.accelerator.precision;
    // Models measured for the task (or not saying which tasks they were measured for) of the accelerator's precision.
    const measuredFor = (m: Model) => m.measuredForTaskIds === undefined || m.measuredForTaskIds.includes(body.taskId);
    models = store.documents.list<Model>('model').filter((m) => m.document.precision === precision && measuredFor(m.document));
    if (deviceClass && models.length === 0) {
      issues.push({ path: 'modelIds', message: `no stored model runs ${precision}, the precision of device class '${deviceClass.id}', and was measured for task '${body.taskId}'` });
    }
  }
  const candidates: PlanDocuments['candidates'] = [];
  for (const model of models) {
    const network = store.documents.latest<Network>('network', model.document.networkId);
    if (network) candidates.push({ model, network });
    else issues.push({ path: 'modelIds', message: `model '${model.id}' refers to network '${model.document.networkId}', which is not stored` });
  }
  if (issues.length > 0 || !task || !deviceClass) throw badRequest('the plan request refers to documents that are not stored', issues);
  return { task, deviceClass, candidates };
}

/**
 * POST /plan: the planner over the latest stored documents, with the device class's calibration from
 * fleet telemetry once there is enough of it. A search costs up to about a second of CPU, so the route is
 * for engineers. Answers the PlanResult plus the calibration applied and the document versions used.
 */
export function registerPlanRoutes(route: Router, deps: ResolvedDeps): void {
  const { store } = deps;
  const shipped = createShippedNetworks(deps.blobs);
  route('plan', async (c) => {
    const body = requestBody(c, planRequestSchema);
    const docs = planDocuments(store, body);
    const calibration = createCalibrator(store).forValidator(docs.deviceClass.id);
    const options: PlanOptions = {
      maxCandidates: API_MAX_PLAN_CANDIDATES,
      ...(body.options?.granuleKib !== undefined ? { granuleKib: body.options.granuleKib } : {}),
      ...(body.options?.nearMisses !== undefined ? { nearMisses: body.options.nearMisses } : {}),
      ...(calibration ? { calibration } : {}),
    };
    // A model that takes its network from its weights is costed from its uploaded blob.
    const candidates: ModelCandidate[] = docs.candidates.map((d) => ({ model: d.model.document, network: d.network.document, ...shipped.forModel(d.model.document, d.network.document) }));
    // InputError (a stored document the planner refuses, options that leave nothing to search) renders as a 400.
    const result = plan({ task: docs.task.document, deviceClass: docs.deviceClass.document, candidates, options });
    return c.json({
      ...result,
      calibration,
      refs: {
        task: ref(docs.task),
        deviceClass: ref(docs.deviceClass),
        models: docs.candidates.map((d) => ({ model: ref(d.model), network: ref(d.network) })),
      },
    });
  });
}
