/**
 * Device identity options shared by `run` (the device under test) and `annotate` (a correction
 * afterwards): name, wafer, site and its x, y on the wafer map, area, thickness, temperature, tags.
 */
import type { Command } from 'commander';
import { parseDeviceIdentity, type DeviceIdentity } from '../../protocols/device-results.js';
import { UsageError } from './usage.js';

export interface DeviceOptions {
  device?: string;
  wafer?: string;
  site?: string;
  x?: string;
  y?: string;
  area?: string;
  thickness?: string;
  temperature?: string;
  deviceTag?: string[];
}

export function withDeviceOptions(cmd: Command): Command {
  return cmd
    .option('--device <name>', 'device under test: its name')
    .option('--wafer <name>', 'device under test: its wafer')
    .option('--site <name>', 'device under test: its site (die) name')
    .option('--x <n>', "device under test: the site's column on the wafer map")
    .option('--y <n>', "device under test: the site's row on the wafer map")
    .option('--area <q>', 'device area, e.g. "1e-4 cm^2" (also the live fit\'s area)')
    .option('--thickness <q>', 'film thickness, e.g. "7 nm" (also the live fit\'s thickness)')
    .option('--temperature <q>', 'device temperature, e.g. "300 K" (also the live fit\'s temperature)')
    .option('--device-tag <tag...>', 'free tags of the device (repeatable)');
}

/** The identity given on the command line, or undefined when none was. */
export async function readDevice(o: DeviceOptions): Promise<DeviceIdentity | undefined> {
  const raw: Record<string, unknown> = {};
  if (o.device !== undefined) raw.device = o.device;
  if (o.wafer !== undefined) raw.wafer = o.wafer;
  if (o.site !== undefined) raw.site = o.site;
  for (const k of ['x', 'y'] as const) {
    const v = o[k];
    if (v === undefined) continue;
    const n = Number(v);
    if (v.trim() === '' || !Number.isFinite(n))
      throw new UsageError(`--${k} '${v}': expected a number (the site's ${k === 'x' ? 'column' : 'row'} on the wafer map)`);
    raw[k] = n;
  }
  if (o.area !== undefined || o.thickness !== undefined || o.temperature !== undefined) {
    const { parseQuantity } = await import('../quantity.js');
    const { bareCheck } = await import('./inputs.js');
    if (o.area !== undefined) raw.area = parseQuantity(o.area, 'area', '--area');
    if (o.thickness !== undefined) raw.thickness = parseQuantity(o.thickness, 'length', '--thickness');
    bareCheck(o.thickness, raw.thickness as number | undefined, '--thickness', 'thickness', 'nm');
    bareCheck(o.area, raw.area as number | undefined, '--area', 'area', 'um^2');
    if (o.temperature !== undefined) raw.temperature = parseQuantity(o.temperature, 'temperature', '--temperature');
  }
  if (o.deviceTag !== undefined) raw.tags = o.deviceTag;
  if (Object.keys(raw).length === 0) return undefined;
  try {
    return parseDeviceIdentity(raw, 'device');
  } catch (e) {
    throw new UsageError((e as Error).message.replace(/^device\.(\w+)/, (_m, f: string) => `--${f === 'tags' ? 'device-tag' : f}`));
  }
}
