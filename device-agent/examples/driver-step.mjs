#!/usr/bin/env node
// Worked example of a command-driver step (device-agent/README.md, "Command driver"). The agent runs
//   driver-step.mjs <log file>
// with one JSON document on stdin: {"format": "ocellus.driver-step/1", "step": "camera" | "memory" |
// "weights", "deviceId", "releaseId", "task", "profileId", "profileRevision", ...the step's settings}.
// Exit 0 when the step is done; any other exit fails the step, and the agent reports the exit code and
// the last lines of stderr, then runs the steps again with the previous profile's settings.
//
// This example does what a vendor SDK wrapper would do, but only records it: it checks the document,
// for "weights" reads the verified file and checks its sha256 as an inference process would before
// loading it, and appends one line per step to the log file. Replace the marked part with the calls of
// your camera SDK or inference server.
import { createHash } from 'node:crypto';
import { appendFileSync, readFileSync } from 'node:fs';

const logFile = process.argv[2];
const input = JSON.parse(readFileSync(0, 'utf8'));
if (input.format !== 'ocellus.driver-step/1') {
  process.stderr.write(`unknown input format ${input.format}\n`);
  process.exit(2);
}

// --- replace from here with your SDK's calls -----------------------------------------------------
if (input.step === 'camera') {
  const { focusDistanceM, fNumber, exposureUs, analogGain } = input.camera;
  if (exposureUs > 1e6 / input.frameRateHz) {
    process.stderr.write(`exposure ${exposureUs} µs is longer than the frame period at ${input.frameRateHz} fps\n`);
    process.exit(3);
  }
  appendFileSync(logFile, `${JSON.stringify({ step: 'camera', task: input.task, focusDistanceM, fNumber, exposureUs, analogGain, frameRateHz: input.frameRateHz })}\n`);
} else if (input.step === 'memory') {
  appendFileSync(logFile, `${JSON.stringify({ step: 'memory', task: input.task, ...input.memory })}\n`);
} else if (input.step === 'weights') {
  const sha256 = createHash('sha256').update(readFileSync(input.weightsPath)).digest('hex');
  if (sha256 !== input.sha256) {
    process.stderr.write(`weights file ${input.weightsPath} does not match sha256 ${input.sha256}\n`);
    process.exit(4);
  }
  appendFileSync(logFile, `${JSON.stringify({ step: 'weights', task: input.task, model: input.model.id, path: input.weightsPath, sha256 })}\n`);
} else {
  process.stderr.write(`unknown step ${input.step}\n`);
  process.exit(2);
}
// --- to here ---------------------------------------------------------------------------------------
