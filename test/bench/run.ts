/** `npm run bench`: prints each benchmark's figures. Not a test: nothing here passes or fails. */
import { cpus } from 'node:os';
import { benchAnalysis } from './analysis.js';
import { benchDiode } from './diode.js';
import { benchProtocols } from './protocols.js';
import { benchDaemon } from './daemon.js';
import { benchPage } from './page.js';
import { benchLot } from './lot.js';
import { benchAdaptive } from './adaptive.js';
import { benchLab } from './lab.js';

process.stdout.write(`plumbline benchmarks — Node ${process.version}, ${cpus()[0]?.model ?? 'unknown CPU'}, single thread\n\n`);
process.stdout.write('analysis core\n');
benchAnalysis();
benchDiode();
process.stdout.write('\nprotocols and simulated instrument\n');
await benchProtocols();
process.stdout.write('\ndaemon: live chain, journal, abort, websocket\n');
await benchDaemon();
process.stdout.write('\nadaptive against fixed sweeps (to the error each scenario\'s usual sweep reaches)\n');
await benchAdaptive();
process.stdout.write('\nlots: many sessions\n');
await benchLot();
process.stdout.write('\nlive page (headless Chromium)\n');
await benchPage();
process.stdout.write('\nlab: stations → MQTT broker → archive → PostgreSQL\n');
await benchLab();
process.exit(0);
