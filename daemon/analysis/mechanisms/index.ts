/** The registry of built-in mechanisms, by id. Adding one: see DEVELOPERS.md. */
import { AnalysisError } from '../errors.js';
import type { Mechanism } from '../mechanism.js';
import { arrhenius } from './arrhenius.js';
import { diodeMechanism } from './diode.js';
import { exponential } from './exponential.js';
import { fowlerNordheimMechanism } from './fowler-nordheim.js';
import { hoppingMechanism } from './hopping.js';
import { linear } from './linear.js';
import { ohmic } from './ohmic.js';
import { pooleFrenkelMechanism } from './poole-frenkel.js';
import { powerLaw } from './power-law.js';
import { schottkyMechanism } from './schottky.js';
import { sclc } from './sclc.js';
import { trapAssistedTunnelingMechanism } from './trap-assisted-tunneling.js';

export const MECHANISMS: readonly Mechanism[] = [
  linear,
  exponential,
  powerLaw,
  arrhenius,
  ohmic,
  sclc,
  fowlerNordheimMechanism,
  pooleFrenkelMechanism,
  schottkyMechanism,
  hoppingMechanism,
  trapAssistedTunnelingMechanism,
  diodeMechanism,
];

/** Every id a fit accepts, including `custom`. */
export const MODEL_IDS: readonly string[] = [...MECHANISMS.map((m) => m.id), 'custom'];

export function getMechanism(id: string): Mechanism {
  const m = MECHANISMS.find((k) => k.id === id);
  if (!m) {
    throw new AnalysisError('UNKNOWN_MODEL', `unknown model '${id}'; choose one of: ${MODEL_IDS.join(', ')}`, 'model');
  }
  return m;
}
