// The sector engine: pure functions over typed arrays, no I/O; used by server, console and
// the lab simulator alike.
export * from './assign'
export * from './calibrate'
export * from './constants'
export * from './detectors'
export * from './errors'
export * from './fingerprint'
export * from './geometry'
// The isotope workflow (shared/engine/isotopes). Its value-with-u type is exported here as
// IsotopeMeasured; `Measured` stays the units' value-with-unit (units.ts).
export * from './isotopes'
export type { Measured } from './units'
export type { Measured as IsotopeMeasured } from './isotopes'
export * from './pipeline'
export * from './random'
export * from './ratios'
export * from './simulate'
export * from './simulateStatic'
export * from './static'
export * from './species'
export * from './spectrum'
export * from './uncertainty'
export * from './units'
