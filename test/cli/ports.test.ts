/** `plumbline ports`: one message for one situation — a scan that could not run, or one that found nothing. */
import { describe, expect, it } from 'vitest';
import { describePorts } from '../../daemon/cli/commands/ports.js';
import { runCli } from '../helpers/cli.js';

const UNAVAILABLE = "the serial-port scan is unavailable: udevadm is missing (no udev here, as in most containers). Give the port's path directly";

describe('ports', () => {
  it('a scan that could not run says only that, with its reason', () => {
    const r = describePorts({ ports: [], warning: UNAVAILABLE });
    expect(r.err).toBe(`plumbline ports: ${UNAVAILABLE}\n`);
    expect(r.out).toBe('');
  });
  it('a scan that ran and found nothing says only that', () => {
    expect(describePorts({ ports: [] })).toEqual({ out: 'no serial ports found\n', err: '' });
  });
  it('ports found beside /dev/serial/by-id are listed even when the scan could not run', () => {
    const r = describePorts({ ports: [{ path: '/dev/ttyUSB0', byId: '/dev/serial/by-id/usb-FTDI_X-if00-port0' }], warning: UNAVAILABLE });
    expect(r.out).toBe('/dev/serial/by-id/usb-FTDI_X-if00-port0  (/dev/ttyUSB0)\n');
    expect(r.err).toMatch(/scan is unavailable/);
    const s = describePorts({ ports: [{ path: '/dev/ttyACM0', manufacturer: 'Acme', serialNumber: '42', vendorId: '2a03', productId: '0043' }] });
    expect(s).toEqual({ out: '/dev/ttyACM0  Acme, serial number 42, USB 2a03:0043\n', err: '' });
  });
  it('the command prints one of the two, never both', () => {
    const r = runCli(['ports']);
    expect(r.code, r.stderr).toBe(0);
    const text = r.stdout + r.stderr;
    expect(/no serial ports found/i.test(text) && /scan is unavailable/.test(text)).toBe(false);
  });
});
