/** The registry of built-in mechanisms, by id. Adding one: see DEVELOPERS.md. */
import { didYouMean } from '../did-you-mean.js';
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

/**
 * The one wording for a model id nobody knows, with the known id it most likely meant: every
 * entry point (the registry, the live settings of the config, API and page, `fit`'s own list with
 * the diode models) says it alike. `known` is the ids that entry point accepts.
 */
export function unknownModelMessage(id: string, known: readonly string[] = MODEL_IDS): string {
  return `unknown model '${id}'${didYouMean(id, known)}; choose one of: ${known.join(', ')}`;
}

export function getMechanism(id: string): Mechanism {
  const m = MECHANISMS.find((k) => k.id === id);
  if (!m) throw new AnalysisError('UNKNOWN_MODEL', unknownModelMessage(id), 'model');
  return m;
}
