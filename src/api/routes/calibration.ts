import { calibratedReport } from '../../fleet/calibration/calibrated-report.js';
import { CALIBRATION_MINIMUM, RECENT_WINDOWS_PER_DEVICE } from '../../fleet/calibration/fit.js';
import { createCalibrator } from '../../fleet/calibration/calibrator.js';
import { DEFAULT_DRIFT_TOLERANCE } from '../../fleet/calibration/drift.js';
import { driftQuerySchema, reportQuerySchema } from '../../fleet/queries.js';
import { readQuery } from '../body.js';
import type { ResolvedDeps } from '../context.js';
import { notFound } from '../errors.js';
import { refusalError } from '../refusals.js';
import type { Router } from '../routing.js';

/** What every calibration answer states: how it is fitted and when it is used. */
const METHOD = {
  fit: 'k = Σ(frames·measured·predicted) ÷ Σ(frames·predicted²), least squares through the origin',
  recentWindowsPerDevice: RECENT_WINDOWS_PER_DEVICE,
  minimum: CALIBRATION_MINIMUM,
  driftTolerance: DEFAULT_DRIFT_TOLERANCE,
};

/** Measured ÷ predicted inference latency and energy per device class and device, drift episodes, calibrated reports. */
export function registerCalibrationRoutes(route: Router, deps: ResolvedDeps): void {
  const { store } = deps;
  const drift = store.drift;

  route('calibration.list', (c) => {
    const calibrator = createCalibrator(store);
    const classes = store.documents.list('device-class').map((d) => d.id);
    return c.json({ method: METHOD, deviceClasses: classes.map((id) => calibrator.deviceClass(id)) });
  });

  route('calibration.class', (c) => {
    const id = c.req.param('id') ?? '';
    if (!store.documents.latest('device-class', id)) throw notFound(`device class '${id}'`);
    return c.json({ method: METHOD, ...createCalibrator(store).deviceClass(id) });
  });

  route('calibration.device', (c) => {
    const id = c.req.param('id') ?? '';
    const fit = createCalibrator(store).device(id);
    if (!fit) throw notFound(`device '${id}'`);
    return c.json({ method: METHOD, ...fit, drift: drift.list({ deviceId: id, limit: 20 }) });
  });

  route('calibration.report', (c) => {
    const id = c.req.param('id') ?? '';
    const { revision } = readQuery(c, reportQuerySchema);
    const result = calibratedReport(store, id, revision);
    if (!result.ok) throw refusalError(result);
    return c.json(result);
  });

  route('drift.list', (c) => {
    const q = readQuery(c, driftQuerySchema);
    return c.json(
      drift.list({
        ...(q.device !== undefined ? { deviceId: q.device } : {}),
        openOnly: q.open === 'true',
        ...(q.limit !== undefined ? { limit: q.limit } : {}),
      }),
    );
  });
}
