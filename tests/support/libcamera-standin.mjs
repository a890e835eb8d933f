// STAND-IN for a camera process on a libcamera stack (a picamera2 or libcamera-apps program): it reads
// the controls file the agent writes and answers in the applied file with the request metadata a
// camera would report: LensPosition as asked, ExposureTime limited to the frame duration, AnalogueGain
// limited to the sensor's maximum (argv[4]), as libcamera's pipeline handlers clamp them (from memory).
//   node libcamera-standin.mjs <controls file> <applied file> <max analogue gain>
import { existsSync, readFileSync, renameSync, writeFileSync } from 'node:fs';

const [controlsFile, appliedFile, maxGainText] = process.argv.slice(2);
const maxGain = Number(maxGainText);
let lastSeq = null;
setInterval(() => {
  if (!existsSync(controlsFile)) return;
  const doc = JSON.parse(readFileSync(controlsFile, 'utf8'));
  if (doc.seq === lastSeq) return;
  lastSeq = doc.seq;
  const c = doc.controls;
  const metadata = {
    LensPosition: c.LensPosition,
    ExposureTime: Math.min(c.ExposureTime, c.FrameDurationLimits[1]),
    AnalogueGain: Math.min(c.AnalogueGain, maxGain),
    FrameDuration: c.FrameDurationLimits[1],
  };
  writeFileSync(`${appliedFile}.tmp`, JSON.stringify({ seq: doc.seq, metadata }));
  renameSync(`${appliedFile}.tmp`, appliedFile);
}, 5);
process.stdout.write('ready\n');
