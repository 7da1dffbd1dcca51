// Physical constants, CODATA 2018 recommended values (Tiesinga et al., Rev. Mod. Phys. 93,
// 025010 (2021); https://physics.nist.gov/cuu/Constants/). The engine names this edition in
// every result so a later change of edition is visible.
export const CODATA_EDITION = 'CODATA 2018'

/** Elementary charge e in C (exact since the 2019 SI redefinition). */
export const ELEMENTARY_CHARGE_C = 1.602176634e-19
/** Atomic mass constant m_u in kg, CODATA 2018: 1.66053906660(50)e-27 kg. */
export const ATOMIC_MASS_CONSTANT_KG = 1.6605390666e-27
/** Electron mass in u, CODATA 2018: 5.48579909065(16)e-4 u. */
export const ELECTRON_MASS_U = 5.48579909065e-4

/** m/q in kg/C times this gives m/z in u per elementary charge (e / m_u). */
export const KG_PER_C_TO_U_PER_E = ELEMENTARY_CHARGE_C / ATOMIC_MASS_CONSTANT_KG

/** Version of the engine, recorded with every result it computes. */
export const ENGINE_VERSION = '1.1.0'
