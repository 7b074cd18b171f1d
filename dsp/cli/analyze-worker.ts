/**
 * Worker thread of `humgauge analyze FILE…` (batch.ts): receives file paths, analyses each with
 * the settings it was started with, and posts back the outcome (report or error), one at a time.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { analyzeFile, type AnalyzeSettings } from './analyze-file';

const settings = (workerData as { settings: AnalyzeSettings }).settings;
const port = parentPort;
if (port) {
  port.on('message', (file: string) => {
    void analyzeFile(file, settings).then((o) => port.postMessage(o));
  });
}
