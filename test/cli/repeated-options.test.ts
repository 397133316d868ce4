/**
 * An option that takes one value, given twice, is refused (exit 2) naming the option and both
 * values, by every command (one rule in daemon/cli/command.ts); options meant to repeat still collect.
 */
import { CommanderError } from 'commander';
import { describe, expect, it } from 'vitest';
import { PlumblineCommand } from '../../daemon/cli/command.js';
import { withDeviceOptions } from '../../daemon/cli/device.js';
import { runCli, tempFile } from '../helpers/cli.js';

describe('repeated options', () => {
  // A 1 kΩ resistor (Ohm's law), 1 to 2 V.
  const file = tempFile('iv.csv', `V,I\n${Array.from({ length: 11 }, (_x, k) => `${1 + 0.1 * k},${(1 + 0.1 * k) / 1000}`).join('\n')}\n`);

  it('a single-value option given twice is refused with both values, for analysis, station and simulator commands alike', () => {
    const cases: [string[], RegExp][] = [
      [['fit', file, '--model', 'ohmic', '--thickness', '5nm', '--thickness', '6nm'], /option '--thickness <q>' given twice \('5nm', then '6nm'\)/],
      [['rank', file, '--mass-ratio', '0.42', '--mass-ratio=0.5'], /option '--mass-ratio <r>' given twice \('0\.42', then '0\.5'\)/],
      [['fit', file, '--temperature', '300 K', '--model', 'ohmic', '--temperature', '77 K'], /option '--temperature <q>' given twice \('300 K', then '77 K'\)/],
      [['sim', '--tcp', '5025', '--tcp', '5026'], /option '--tcp <port>' given twice \('5025', then '5026'\)/],
      [['refit', file, '--model', 'ohmic', '--model', 'diode'], /option '--model <id>' given twice \('ohmic', then 'diode'\)/],
    ];
    for (const [args, message] of cases) {
      const r = runCli(args);
      expect(r.code, args.join(' ')).toBe(2);
      expect(r.stderr, args.join(' ')).toMatch(message);
    }
    // Once each, the same command runs.
    expect(runCli(['fit', file, '--model', 'ohmic', '--thickness', '5nm', '--json']).code).toBe(0);
    // A flag without a value changes nothing when repeated.
    expect(runCli(['fit', file, '--model', 'ohmic', '--json', '--json']).code).toBe(0);
  });

  it('the device options of run and annotate: --device-tag collects every value, --wafer twice is refused', () => {
    const cmd = () => withDeviceOptions(new PlumblineCommand('plumbline').exitOverride().configureOutput({ writeErr: () => {} }));
    const ok = cmd().parse(['--device-tag', 'a', '--wafer', 'W1', '--device-tag', 'b', 'c'], { from: 'user' });
    expect(ok.opts().deviceTag).toEqual(['a', 'b', 'c']);
    expect(ok.opts().wafer).toBe('W1');
    let error: unknown;
    try {
      cmd().parse(['--wafer', 'W1', '--device-tag', 'a', '--wafer', 'W2'], { from: 'user' });
    } catch (e) {
      error = e;
    }
    expect(error).toBeInstanceOf(CommanderError);
    expect((error as CommanderError).exitCode).toBe(2);
    expect((error as Error).message).toMatch(/option '--wafer <name>' given twice \('W1', then 'W2'\)/);
  });

  it('subcommands are made by the same class, so the rule reaches every command', () => {
    const program = new PlumblineCommand('plumbline');
    expect(program.command('x')).toBeInstanceOf(PlumblineCommand);
  });
});
