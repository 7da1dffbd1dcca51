// The isotope workflow: δ sequences (CO2, N2, O2, H2) from acquisitions to the international
// scales. Pure functions, no I/O.
export * from './types'
export * from './referenceMaterials'
export * from './isotopologues'
export * from './regression'
export * from './deltaSteps'
export * from './deltaScale'
export * from './deltaNormalise'
export * from './reproducibility'
export * from './studentT'
export * from './processDeltaSequence'
export * from './simulateSequence'
export * from './fromResult'
