/**
 * `plumbline ports`: the serial ports of this machine.
 */
import type { Command } from 'commander';
import type { SerialPortInfo } from '../../../protocols/transport.js';

/**
 * The text of a port listing: `out` for stdout, `err` for stderr. A scan that could not run says
 * so with its reason and lists only the ports found without it (it never claims none were found);
 * a scan that ran and found nothing says that alone.
 */
export function describePorts(r: { ports: readonly SerialPortInfo[]; warning?: string }): { out: string; err: string } {
  const err = r.warning ? `plumbline ports: ${r.warning}\n` : '';
  if (r.ports.length === 0) return { out: r.warning ? '' : 'no serial ports found\n', err };
  const lines = r.ports.map((p) => {
    const about = [
      p.manufacturer,
      p.serialNumber ? `serial number ${p.serialNumber}` : undefined,
      p.vendorId ? `USB ${p.vendorId}:${p.productId ?? '?'}` : undefined,
    ]
      .filter(Boolean)
      .join(', ');
    return `${p.byId ?? p.path}${p.byId ? `  (${p.path})` : ''}${about ? `  ${about}` : ''}\n`;
  });
  return { out: lines.join(''), err };
}

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
      const { out, err } = describePorts(r);
      process.stderr.write(err);
      process.stdout.write(out);
    });
}
