import { describe, it } from 'vitest';
import { BOLTZMANN_EV_PER_K, FN_A_A_EV_PER_V2, FN_B_EV32_V_PER_NM, RICHARDSON_FREE_A_PER_M2_K2, thermalVoltage } from '../../daemon/analysis/constants.js';
import { expectRelClose } from '../helpers/reference.js';

describe('constants derived from CODATA 2018', () => {
  // Forbes, Appl. Phys. Lett. 89, 113122 (2006): a = 1.541434e-6 A eV V^-2, b = 6.830890 eV^-3/2 V nm^-1.
  it('first Fowler–Nordheim constant matches Forbes to his 7 digits', () => {
    expectRelClose(FN_A_A_EV_PER_V2, 1.541434e-6, 5e-7);
  });
  it('second Fowler–Nordheim constant matches Forbes to his 7 digits', () => {
    expectRelClose(FN_B_EV32_V_PER_NM, 6.83089, 5e-7);
  });
  // Sze & Ng, Physics of Semiconductor Devices: free-electron A* ≈ 120 A cm^-2 K^-2;
  // 120.173 A cm^-2 K^-2 computed from 4πqm_e k²/h³ with CODATA 2018 constants.
  it('free-electron Richardson constant is 120.17 A/(cm^2 K^2)', () => {
    expectRelClose(RICHARDSON_FREE_A_PER_M2_K2 * 1e-4, 120.173, 1e-5);
  });
  // kT/q at 300 K = 25.852 mV (CODATA 2018 exact k and q); k_B = 8.617333262e-5 eV/K (CODATA 2018).
  it('thermal voltage at 300 K and k_B in eV/K', () => {
    expectRelClose(thermalVoltage(300), 0.025852, 2e-5);
    expectRelClose(BOLTZMANN_EV_PER_K, 8.617333262e-5, 1e-10);
    // One decade of current per ln(10)·kT/q = 59.53 mV at 300 K (common practice figure).
    expectRelClose(Math.LN10 * thermalVoltage(300), 0.05953, 1e-4);
  });
});
