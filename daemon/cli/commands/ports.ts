/**
 * `plumbline ports`: the serial ports of this machine.
 */
import type { Command } from 'commander';

export function registerPorts(program: Command): void {
  program
    .command('ports')
    .description('list the serial ports this machine has (USB adapters show their stable /dev/serial/by-id name)')
    .option('--json', 'print one JSON object')
    .action(async (o: { json?: boolean }) => {
      const { listSerialPorts } = await import('../../../protocols/transport.js');
      const r = await listSerialPorts();
      if (o.json) {
        process.stdout.write(`${JSON.stringify(r)}\n`);
        return;
      }
      if (r.warning) process.stderr.write(`plumbline ports: ${r.warning}\n`);
      if (r.ports.length === 0) process.stdout.write('no serial ports found\n');
      for (const p of r.ports) {
        const about = [
          p.manufacturer,
          p.serialNumber ? `serial number ${p.serialNumber}` : undefined,
          p.vendorId ? `USB ${p.vendorId}:${p.productId ?? '?'}` : undefined,
        ]
          .filter(Boolean)
          .join(', ');
        process.stdout.write(`${p.byId ?? p.path}${p.byId ? `  (${p.path})` : ''}${about ? `  ${about}` : ''}\n`);
      }
    });
}
