/**
 * The station config's JSON Schema (config/station.schema.json) is generated from the zod schemas
 * that validate configs, stays in step with them, and says the same as they do: the shipped config
 * passes, broken ones fail. Checked with Ajv, a general-purpose JSON Schema (draft 2020-12)
 * validator, so an editor using the schema sees what plumbline will accept.
 */
import { readFileSync } from 'node:fs';
import { Ajv2020 } from 'ajv/dist/2020.js';
import { describe, expect, it } from 'vitest';
import { parseConfig, DEFAULT_CONFIG_FILE } from '../../daemon/run/config.js';
import { loadDialect } from '../../protocols/dialect.js';
import { STATION_SCHEMA_FILE, stationJsonSchema } from '../../daemon/run/config-schema.js';

const committed = JSON.parse(readFileSync(STATION_SCHEMA_FILE, 'utf8'));
const validate = new Ajv2020({ strict: false, allErrors: true }).compile(committed);

describe('station config JSON Schema', () => {
  it('the committed file is what the zod schemas generate (regenerate: node dist/daemon/run/config-schema.js --write)', () => {
    expect(committed).toEqual(JSON.parse(JSON.stringify(stationJsonSchema())));
  });

  it('the shipped config passes both the schema and plumbline', () => {
    const raw = JSON.parse(readFileSync(DEFAULT_CONFIG_FILE, 'utf8'));
    expect(validate(raw), JSON.stringify(validate.errors)).toBe(true);
    expect(() => parseConfig(raw, 'station.json')).not.toThrow();
  });

  const base = { dialect: 'protection-trip', instrument: { kind: 'tcp', host: 'smu.lab' }, limits: { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1 } };
  const broken: [string, unknown][] = [
    ['a limit given as text', { ...base, limits: { ...base.limits, maxVoltage: '20' } }],
    ['an unknown key', { ...base, colour: 'blue' }],
    ['a serial port with 9 data bits', { ...base, instrument: { kind: 'serial', path: '/dev/ttyUSB0', dataBits: 9 } }],
    ['a plan of no known kind', { ...base, plan: { kind: 'zigzag', compliance: 1e-3 } }],
    ['a voltage ramp without its step', { ...base, plan: { kind: 'voltage-ramp', stop: 10, stepTime: 0.1, compliance: 1e-3 } }],
  ];
  for (const [what, cfg] of broken) {
    it(`refuses ${what}, as plumbline does`, () => {
      expect(validate(cfg)).toBe(false);
      expect(() => parseConfig(cfg, 'test')).toThrow();
    });
  }

  it('accepts every plan kind plumbline accepts', () => {
    for (const plan of [
      { start: 0, stop: 5, points: 11, compliance: 1e-3 },
      { kind: 'adaptive', stop: 10, maxPoints: 100, compliance: 1e-3, target: { parameter: 'barrierHeight', stdErr: 0.005 } },
      { kind: 'voltage-ramp', stop: 10, step: 0.1, stepTime: 0.1, compliance: 1e-3 },
      { kind: 'current-ramp', start: 1e-9, stop: 1e-3, stepTime: 0.1, voltageLimit: 15 },
      { kind: 'constant-voltage', stress: 8, duration: 60, sampleEvery: 1, compliance: 1e-3 },
    ]) {
      const cfg = { ...base, plan };
      expect(validate(cfg), JSON.stringify(validate.errors)).toBe(true);
      expect(() => parseConfig(cfg, 'test')).not.toThrow();
    }
  });
});

describe('config messages a person acts on', () => {
  const base = { dialect: 'protection-trip', instrument: { kind: 'tcp', host: 'smu.lab' }, limits: { maxVoltage: 20, maxCompliance: 0.01, maxPower: 0.1 } };
  it('a baud rate written as text is told to be a number, not a quantity in SI', () => {
    const cfg = { ...base, instrument: { kind: 'serial', path: '/dev/ttyUSB0', baudRate: 'fast' } };
    expect(() => parseConfig(cfg, 'station.json')).toThrow(/field 'instrument\.baudRate': 'fast' is text; write it as a JSON number, e\.g\. 9600 or 115200/);
    expect(() => parseConfig(cfg, 'station.json')).not.toThrow(/1 mA/);
  });
  it('a misspelt dialect gets the shipped names and the closest one', () => {
    expect(() => loadDialect('protection-trp')).toThrow(
      /dialect 'protection-trp': not a shipped dialect \(did you mean 'protection-trip'\?\) \(shipped: protection-status, protection-trip/,
    );
  });
});
