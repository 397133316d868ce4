/**
 * Physical constants, CODATA 2018 recommended values (NIST). q, h and k_B are exact in the 2019 SI.
 * Every other constant in plumbline is derived here from these, so there is one place to audit.
 */

/** Elementary charge, C (exact). */
export const ELEMENTARY_CHARGE_C = 1.602176634e-19;
/** Planck constant, J·s (exact). */
export const PLANCK_J_S = 6.62607015e-34;
/** Boltzmann constant, J/K (exact). */
export const BOLTZMANN_J_PER_K = 1.380649e-23;
/** Electron rest mass, kg (CODATA 2018). */
export const ELECTRON_MASS_KG = 9.1093837015e-31;
/** Vacuum electric permittivity, F/m (CODATA 2018). */
export const VACUUM_PERMITTIVITY_F_PER_M = 8.8541878128e-12;

/** Boltzmann constant in eV/K (k_B / q). */
export const BOLTZMANN_EV_PER_K = BOLTZMANN_J_PER_K / ELEMENTARY_CHARGE_C;

/** Thermal voltage kT/q in volts at temperature T (K). */
export function thermalVoltage(temperatureK: number): number {
  return (BOLTZMANN_J_PER_K * temperatureK) / ELEMENTARY_CHARGE_C;
}

/**
 * First Fowler–Nordheim constant a = q³/(8πh), in A·eV·V⁻² (Forbes' convention: barrier in eV).
 * Numerically equal to q²/(8πh) in SI once the barrier is expressed in eV.
 */
export const FN_A_A_EV_PER_V2 = (ELEMENTARY_CHARGE_C * ELEMENTARY_CHARGE_C) / (8 * Math.PI * PLANCK_J_S);

/**
 * Second Fowler–Nordheim constant b = (8π/3)·√(2m₀)/(q h), expressed for a barrier in eV and a
 * field in V/m: b = 8π√(2 m₀ q)/(3h), unit eV^-3/2·V·m⁻¹.
 */
export const FN_B_EV32_V_PER_M = (8 * Math.PI * Math.sqrt(2 * ELECTRON_MASS_KG * ELEMENTARY_CHARGE_C)) / (3 * PLANCK_J_S);

/** The same constant in Forbes' customary unit eV^-3/2·V·nm⁻¹. */
export const FN_B_EV32_V_PER_NM = FN_B_EV32_V_PER_M * 1e-9;

/** Free-electron Richardson constant A* = 4π q m₀ k_B²/h³, A·m⁻²·K⁻². */
export const RICHARDSON_FREE_A_PER_M2_K2 =
  (4 * Math.PI * ELEMENTARY_CHARGE_C * ELECTRON_MASS_KG * BOLTZMANN_J_PER_K * BOLTZMANN_J_PER_K) / (PLANCK_J_S * PLANCK_J_S * PLANCK_J_S);
