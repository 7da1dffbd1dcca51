// The isotope workflow's shapes: what a sequence hands the engine and what the engine gives
// back. Pure types; the method's own schema (what a lab registers) is in
// shared/schemas/methods.ts, and every step's formula lives beside its source in this folder.

/** A value with its standard uncertainty (GUM, JCGM 100:2008, 2.3.1). */
export interface Measured { value: number, u: number }

/** What an acquisition is in its sequence (common practice, no source). */
export type SequenceRole = 'sample' | 'working-standard' | 'reference-gas' | 'blank' | 'monitoring-standard'
export const sequenceRoles: readonly SequenceRole[] = ['sample', 'working-standard', 'reference-gas', 'blank', 'monitoring-standard']

/** The gases Arcwise turns into δ values or corrected ratios. */
export type GasSystem = 'CO2' | 'N2' | 'O2' | 'H2' | 'Ar'
export const gasSystems: readonly GasSystem[] = ['CO2', 'N2', 'O2', 'H2', 'Ar']

/**
 * One acquisition of a sequence as the engine measured it. Beams are keyed by nominal m/z
 * ("44"), ratios by "numerator/denominator" nominal m/z ("45/44"). Signals are baseline
 * subtracted, in amperes (the engine's detector conversion), each with its standard
 * uncertainty; ratios come from the engine's peak areas (sweeps) or cycle statistics (static
 * multi-collector), with the uncertainty it stated.
 */
export interface SequenceItem {
  position: number
  role: SequenceRole
  /** For standards: the reference material's or working standard's id. */
  material?: string
  /** When the instrument measured it, in ms since the epoch. */
  acquiredAt: number
  beams: Record<string, Measured>
  /**
   * What `beams` hold: 'mean-current' (default), the mean ion current in amperes over a steady
   * integration (static cups, dual-inlet style); 'peak-area', a swept or transient peak's area
   * per m/z, only proportional to the current. Ratios and blank subtraction work on either;
   * the H3+ factor needs amperes of a steady signal and refuses 'peak-area'.
   */
  beamKind?: 'mean-current' | 'peak-area'
  ratios: Record<string, Measured>
  /**
   * Static-vacuum readings per cycle (noble gases): seconds since the gas was let into the
   * mass spectrometer, and each beam's signal in amperes, for the time-zero regression.
   */
  cycles?: { t: number, beams: Record<string, number> }[]
}

/** An accepted value of a standard for one quantity (e.g. "δ13C" on VPDB, or "40Ar/36Ar"). */
export interface MaterialValues {
  id: string
  name: string
  /** Quantity → accepted value with its standard uncertainty; δ in ‰ on the quantity's scale. */
  values: Record<string, Measured>
  source: string
}

/** A correction as applied: its name, the source of its formula and the parameters it used. */
export interface AppliedStep {
  step: string
  source: string
  parameters: Record<string, unknown>
}

export interface OutcomeFlag { code: string, message: string, position?: number }

/** A quantity's final value for one acquisition, on its scale, with k for the expanded U. */
export interface ScaledValue extends Measured {
  scale: string
  /**
   * Coverage factor for the expanded uncertainty U = k·u (GUM 6.2.1): 2, or Student's t at
   * 95.45 % for effectiveDof when a Type A term with few degrees of freedom is in u (GUM G.4).
   */
  k: number
  /** Welch–Satterthwaite effective degrees of freedom of u (GUM G.4.1), when finite. */
  effectiveDof?: number
}

export interface OutcomeItem {
  position: number
  role: SequenceRole
  material?: string
  /** Before normalisation: δ against the reference gas (delta systems) or the measured ratio. */
  raw: Record<string, Measured>
  /** After every step of the method: on the international scale, or the corrected ratio. */
  final: Record<string, ScaledValue>
  /** Standards: final value minus accepted value, per quantity. */
  residual?: Record<string, number>
  flags: OutcomeFlag[]
}

/** The regression that carries measured values onto the scale: true = intercept + slope · measured. */
export interface Normalisation {
  quantity: string
  scale: string
  slope: Measured
  intercept: Measured
  covariance: number
  rmsResidual: number
  /**
   * More than two anchors: χ²/ν of the anchors about the line (MSWD). Above 1 the line's
   * covariance was multiplied by it (York et al. 2004; Birge-ratio inflation, common practice).
   */
  mswd?: number
  anchors: {
    material: string, positions: number[], accepted: Measured, measuredMean: Measured, residual: number
    /** Scatter of the anchor's acquisitions about their mean against their stated u: χ²/ν (ν = n − 1; absent for one acquisition). */
    reducedChi2?: number
  }[]
}

export interface DriftFit {
  quantity: string
  model: 'none' | 'linear-time' | 'linear-position'
  /** Drift per hour (linear-time) or per position (linear-position), in the quantity's unit. */
  slope: Measured
  material: string
}

export interface SequenceOutcome {
  gas: GasSystem
  quantities: string[]
  items: OutcomeItem[]
  normalisation: Normalisation[]
  drift: DriftFit[]
  /** In the order they ran. */
  steps: AppliedStep[]
  flags: OutcomeFlag[]
  /** False when an acceptance rule of the method failed: the sequence must not be released. */
  accepted: boolean
  /**
   * Errors common to many acquisitions (blank mean, reference-gas acquisitions, hence the H3+
   * factor), each propagated once through every step to every result (GUM 5.2): its name and u.
   */
  sharedTerms?: { source: string, terms: { term: string, u: number }[] }
}
