// Physical constants by CODATA edition. The default is CODATA 2022 (Mohr, Newell, Taylor,
// Tiesinga, "CODATA recommended values of the fundamental physical constants: 2022",
// Rev. Mod. Phys. 97 (2025) 025002; https://physics.nist.gov/cuu/Constants/); CODATA 2018
// (Tiesinga et al., Rev. Mod. Phys. 93 (2021) 025010) is kept so that results of engine 1.x
// can be reproduced. The 2022 values were checked against the published 2022 table as
// carried by the mp-units CODATA 2022 header (codata2022.h); e and c are exact in the SI.
// The engine names the edition in every result, so a change of edition is visible.

export interface ConstantsEdition {
  name: 'CODATA 2022' | 'CODATA 2018'
  /** Elementary charge e in C (exact since the 2019 SI redefinition). */
  elementaryChargeC: number
  /** Atomic mass constant m_u in kg. */
  atomicMassConstantKg: number
  /** Electron mass in u. */
  electronMassU: number
  /** Speed of light in vacuum c in m/s (exact, SI definition of the metre). */
  speedOfLightMps: number
}

export const CODATA_2022: ConstantsEdition = {
  name: 'CODATA 2022',
  elementaryChargeC: 1.602176634e-19,
  // m_u = 1.66053906892(52)e-27 kg
  atomicMassConstantKg: 1.66053906892e-27,
  // A_r(e) = 5.485799090441(97)e-4
  electronMassU: 5.485799090441e-4,
  speedOfLightMps: 299792458,
}

export const CODATA_2018: ConstantsEdition = {
  name: 'CODATA 2018',
  elementaryChargeC: 1.602176634e-19,
  // m_u = 1.66053906660(50)e-27 kg
  atomicMassConstantKg: 1.6605390666e-27,
  // A_r(e) = 5.48579909065(16)e-4
  electronMassU: 5.48579909065e-4,
  speedOfLightMps: 299792458,
}

export const CODATA_EDITION = CODATA_2022.name
/** Elementary charge e in C, CODATA 2022 (exact). */
export const ELEMENTARY_CHARGE_C = CODATA_2022.elementaryChargeC
/** Atomic mass constant m_u in kg, CODATA 2022. */
export const ATOMIC_MASS_CONSTANT_KG = CODATA_2022.atomicMassConstantKg
/** Electron mass in u, CODATA 2022. */
export const ELECTRON_MASS_U = CODATA_2022.electronMassU
/** Speed of light c in m/s (exact). */
export const SPEED_OF_LIGHT_M_PER_S = CODATA_2022.speedOfLightMps

/** m/q in kg/C times this gives m/z in u per elementary charge (e / m_u), CODATA 2022. */
export const KG_PER_C_TO_U_PER_E = ELEMENTARY_CHARGE_C / ATOMIC_MASS_CONSTANT_KG

/** Version of the engine, recorded with every result it computes. */
export const ENGINE_VERSION = '2.0.1'

/**
 * The physics a conversion uses: the constants edition and whether the relativistic
 * momentum is used. Engine 2.x: CODATA 2022, relativistic. Engine 1.x compatibility
 * (to reproduce a result computed by engine 1.0.0): CODATA 2018, non-relativistic.
 */
export interface Physics { constants: ConstantsEdition, relativistic: boolean, compatibility: '2.x' | '1.x' }

export const PHYSICS_2X: Physics = { constants: CODATA_2022, relativistic: true, compatibility: '2.x' }
export const PHYSICS_1X: Physics = { constants: CODATA_2018, relativistic: false, compatibility: '1.x' }

export function physicsFor(compatibility: '1.x' | '2.x' | undefined): Physics {
  return compatibility === '1.x' ? PHYSICS_1X : PHYSICS_2X
}

/** e / m_u of an edition: kg/C to u per e. */
export const kgPerCToUPerE = (c: ConstantsEdition) => c.elementaryChargeC / c.atomicMassConstantKg
