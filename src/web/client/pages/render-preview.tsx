import { useState } from 'preact/hooks';
import { ApiError } from '../api.js';
import { useSession } from '../context.js';
import type { Profile } from '../../../api-client/response-types.js';
import { ErrorNote } from '../ui/status.js';

/** The server's limit (src/profiles/preview.ts), checked here too so a big file is not sent at all. */
const MAX_IMAGE_MIB = 4;

interface PreviewFigures {
  inputPx: [number, number];
  distanceM: number;
  downscale: number;
  blurSpotInputPx: number;
  motionInputPx: number;
  luminanceCdM2: number;
  snrInputDb: number | null;
}

function base64Of(bytes: Uint8Array): string {
  let text = '';
  for (let i = 0; i < bytes.length; i += 0x8000) text += String.fromCharCode(...bytes.subarray(i, i + 0x8000));
  return btoa(text);
}

const fmt = (v: number) => (Math.abs(v) >= 10 ? v.toFixed(1) : v.toFixed(2));

/**
 * "What the robot sees": a sample image through the draft's settings at a chosen distance, rendered by the
 * server exactly as `ocellus render` renders it. Folded away by default so the report and its plots stay where they are.
 */
export function RenderPreview({ draft }: { draft: Profile }) {
  const { api } = useSession();
  const [file, setFile] = useState<File | null>(null);
  const [distance, setDistance] = useState(String(draft.camera.focusDistanceM));
  const [busy, setBusy] = useState(false);
  const [error, setError] = useState<Error | null>(null);
  const [shown, setShown] = useState<{ src: string; figures: PreviewFigures } | null>(null);

  async function render() {
    if (!file) return;
    setError(null);
    const distanceM = Number(distance);
    if (!(distanceM > 0)) return setError(new Error(`the distance must be a number of metres above 0, got '${distance}'`));
    if (file.size > MAX_IMAGE_MIB * 1024 * 1024) return setError(new Error(`${file.name} is ${(file.size / 1024 / 1024).toFixed(1)} MiB; the preview takes images of at most ${MAX_IMAGE_MIB} MiB`));
    setBusy(true);
    try {
      const image = base64Of(new Uint8Array(await file.arrayBuffer()));
      const body = new TextEncoder().encode(JSON.stringify({ profile: draft, image, distanceM }));
      const res = await api.raw('POST', '/api/v1/render-preview', { body, headers: { 'content-type': 'application/json' } });
      if (!res.ok) {
        const answer = (await res.json().catch(() => null)) as { error?: string; issues?: Array<{ path: string; message: string }> } | null;
        throw new ApiError(res.status, answer?.error ?? `${res.status} ${res.statusText}`, answer?.issues ?? []);
      }
      const png = new Uint8Array(await res.arrayBuffer());
      const figures = JSON.parse(res.headers.get('x-ocellus-preview') ?? '{}') as PreviewFigures;
      // A data: URL, which the console's Content-Security-Policy allows for images (blob: it does not).
      setShown({ src: `data:image/png;base64,${base64Of(png)}`, figures });
    } catch (err) {
      setError(err as Error);
    } finally {
      setBusy(false);
    }
  }

  return (
    <details class="render-preview">
      <summary>What the robot sees</summary>
      <p class="muted">
        A sample image of yours through these settings, at one distance: resized to the network's input, blurred by the lens, pixel and motion, with
        the sensor's noise at the task's darkest light. A preview, not a safety check: something hard to see here may be missed on the robot.
      </p>
      <div class="field">
        <label for="preview-image">Sample image</label>
        <input id="preview-image" type="file" accept="image/png,image/jpeg,image/webp" onChange={(e) => setFile((e.currentTarget as HTMLInputElement).files?.[0] ?? null)} />
      </div>
      <div class="field">
        <label for="preview-distance">
          Object distance <span class="unit">(m)</span>
        </label>
        <input id="preview-distance" type="number" step="0.01" min="0.01" value={distance} onInput={(e) => setDistance((e.currentTarget as HTMLInputElement).value)} />
      </div>
      <div class="actions">
        <button type="button" class="btn" disabled={!file || busy} onClick={render}>
          {busy ? 'Rendering…' : 'Render preview'}
        </button>
      </div>
      <ErrorNote error={error} title="No preview" />
      {shown && (
        <figure class="preview-figure">
          <img src={shown.src} alt={`The sample image as the network sees it at ${shown.figures.distanceM} m`} width={shown.figures.inputPx[0]} height={shown.figures.inputPx[1]} />
          <figcaption>
            {shown.figures.inputPx[0]}×{shown.figures.inputPx[1]} px at {shown.figures.distanceM} m: blur spot {fmt(shown.figures.blurSpotInputPx)} input px, motion{' '}
            {fmt(shown.figures.motionInputPx)} px, SNR {shown.figures.snrInputDb === null ? '∞' : fmt(shown.figures.snrInputDb)} dB at {fmt(shown.figures.luminanceCdM2)} cd/m².
          </figcaption>
        </figure>
      )}
    </details>
  );
}
