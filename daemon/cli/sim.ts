/** `plumbline sim`: list scenarios, or serve the simulated instrument over TCP or a pty pair. */
import { UsageError } from './usage.js';
import type { Command } from 'commander';

interface SimOptions {
  list?: boolean;
  tcp?: string;
  pty?: boolean;
  scenario: string;
  seed: string;
  host: string;
}

export function registerSim(program: Command): void {
  program
    .command('sim')
    .description('the built-in simulated source-measure unit (it speaks the protection-trip and protection-status dialects)')
    .option('--list', "print each scenario's name and a one-line description")
    .option('--tcp <port>', 'serve on a TCP raw socket (SCPI raw-socket convention: 5025)')
    .option('--host <addr>', 'address to bind for --tcp', '127.0.0.1')
    .option('--pty', 'serve on a pseudo-terminal pair (needs socat); prints the path to open')
    .option('--scenario <name>', 'device scenario (see --list)', 'oxide-fn')
    .option('--seed <n>', 'noise seed (same seed, same readings)', '1')
    .action(async (o: SimOptions) => {
      const { SimulatedSmu } = await import('../simulator/instrument.js');
      const { findScenario, listScenarios } = await import('../simulator/scenarios.js');
      const { servePty, serveTcp } = await import('../simulator/serve.js');
      if (o.list) {
        for (const s of listScenarios()) process.stdout.write(`${s.name.padEnd(20)} ${s.description}\n`);
        return;
      }
      if (!o.tcp && !o.pty) throw new UsageError('say where to serve: --tcp PORT or --pty (or --list)');
      const scenario = findScenario(o.scenario);
      const smu = new SimulatedSmu({ device: scenario.device, seed: Number(o.seed) });
      const closers: (() => Promise<void> | void)[] = [];
      if (o.tcp) {
        const port = Number(o.tcp);
        if (!Number.isInteger(port) || port < 0 || port > 65535) throw new UsageError(`--tcp '${o.tcp}': expected a port number`);
        const server = await serveTcp(smu, port, o.host);
        const addr = server.address();
        const bound = typeof addr === 'object' && addr ? addr.port : port;
        process.stdout.write(`simulated SMU '${scenario.name}' on tcp://${o.host}:${bound} (SCPI, LF-terminated)\n`);
        // Stopping the simulator drops its connections, as unplugging an instrument would: a
        // listening server alone waits for its clients to hang up first.
        const links = new Set<{ destroy(): void }>();
        server.on('connection', (s) => {
          links.add(s);
          s.on('close', () => links.delete(s));
        });
        closers.push(() => {
          for (const s of links) s.destroy();
          return new Promise<void>((r) => server.close(() => r()));
        });
      }
      if (o.pty) {
        const pair = await servePty(smu);
        process.stdout.write(`simulated SMU '${scenario.name}' on a pty: open ${pair.clientPath} (any baud rate, 8N1)\n`);
        closers.push(() => pair.close());
      }
      const stop = async () => {
        for (const c of closers) await c();
        process.exit(0);
      };
      process.once('SIGINT', stop);
      process.once('SIGTERM', stop);
      await new Promise(() => undefined);
    });
}
