import { BlurPlot, type BlurPoint } from '../charts/blur-plot.js';
import { MtfPlot, type MtfPoint } from '../charts/mtf-plot.js';
import { StageBars } from '../charts/stage-bars.js';
import type { Report, Task, ValidationFigures } from '../../../api-client/response-types.js';
import { ChecksTable } from '../ui/checks-table.js';
import { StatusBadge } from '../ui/status.js';

interface Props {
  report: Report & { figures?: Partial<ValidationFigures> };
  task: Task | undefined;
  focusM: number;
  checking: boolean;
}

/**
 * What the validator says of the settings on screen: the verdict and every check, with the plots beside them
 * (combined blur over distance with its parts, the MTF at the worst point, cost by stage).
 */
export function ProfileReport({ report, task, focusM, checking }: Props) {
  const f = report.figures ?? {};
  const latency = f.latency;
  const energy = f.energy;
  return (
    <section class="report" aria-labelledby="report-title" aria-busy={checking}>
      <h2 id="report-title">
        Validation <StatusBadge status={report.status} /> {checking && <span class="muted small">checking…</span>}
      </h2>
      <div class="report-body">
      <div class="report-checks">
        <ChecksTable checks={report.checks} />
      </div>
      <div class="report-plots">
        <div>
          <h3>Combined blur over the working range</h3>
          {task && f.blurCurve ? (
            <BlurPlot
              curve={f.blurCurve as BlurPoint[]}
              toleratedBlurPx={f.toleratedBlurPx}
              unit={f.toleratedBlurUnit}
              downscale={f.downscale}
              nearM={task.nearDistanceM}
              farM={task.farDistanceM}
              focusM={focusM}
            />
          ) : (
            <p class="muted">No blur figures in this report.</p>
          )}
        </div>
        <div>
          <h3>MTF at the worst point{f.worstBlur ? ` (${f.worstBlur.distanceM.toPrecision(3)} m)` : ''}</h3>
          {f.mtfAtWorst && f.worstBlur ? (
            <MtfPlot points={f.mtfAtWorst as MtfPoint[]} distanceM={f.worstBlur.distanceM} downscale={f.downscale ?? 1} />
          ) : (
            <p class="muted">No MTF figures in this report.</p>
          )}
        </div>
        <div>
          <h3>Cost of one frame by stage</h3>
          {latency ? (
            <StageBars
              title="Latency"
              unit="ms"
              total={latency.totalMs}
              budget={task?.latencyBudgetMs}
              stages={[
                { label: 'exposure', value: latency.exposureMs },
                { label: 'readout', value: latency.readoutMs },
                { label: 'ISP', value: latency.ispMs },
                { label: 'inference', value: latency.inferenceMs },
              ]}
            />
          ) : (
            <p class="muted">No latency estimate (the compute checks could not run).</p>
          )}
          {energy && (
            <StageBars
              title="Energy"
              unit="mJ"
              total={energy.totalMj}
              budget={task?.energyBudgetMjPerFrame}
              stages={[
                { label: 'readout', value: energy.readoutMj },
                { label: 'ISP', value: energy.ispMj },
                { label: 'inference', value: energy.inferenceMj },
                // Reports saved before the whole-frame power model carry neither figure.
                { label: 'light', value: energy.lightMj ?? 0 },
                { label: 'idle', value: energy.idleMj ?? 0 },
              ]}
            />
          )}
        </div>
      </div>
      </div>
    </section>
  );
}
