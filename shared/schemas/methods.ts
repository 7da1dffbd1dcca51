import { z } from 'zod'

// A measurement method as a lab registers it per instrument (versioned by the server): the gas,
// the corrections in the order they run, the standards that anchor the scale and the rules a
// sequence must pass. The engine (shared/engine/isotopes) reads exactly this shape.

const finite = z.number({ error: 'must be a finite number' }).finite('must be a finite number')
const materialId = z.string({ error: 'is required' }).trim().min(1, 'is required').max(64)

export const methodStep = z.discriminatedUnion('step', [
  /** Subtract the mean of the sequence's blanks from every beam (procedural blank). */
  z.object({ step: z.literal('blank') }).strict().describe("Subtracts the sequence's procedural blank (mean of its blank acquisitions, with the uncertainty of a new draw) from every beam, then recomputes the ratios; for static vacuum each blank is first regressed to the inlet time."),
  /** δ of each acquisition against the reference gas measured beside it. */
  z.object({ step: z.literal('reference-gas'), bracketing: z.enum(['nearest', 'neighbours-mean']).default('neighbours-mean') }).strict().describe("δ of each acquisition against the laboratory reference gas measured beside it (the nearest, or the mean of its neighbours); the reference gas's own δ on the scale comes from `referenceGas`. N2, O2 and H2 are carried to atomic ratios exactly (29R = 2·15R, 3R = 2·2R, O2 by its isotopologues)."),
  /** H2: the H3+ factor from reference-gas acquisitions of different intensity. */
  z.object({ step: z.literal('h3-factor') }).strict().describe('H2: the H3+ factor K fitted on reference-gas acquisitions of different intensity (3/2 = R + K·i2), then R − K·i2 (Sessions et al. 2001). Needs steady beams (dual-inlet style); swept peak areas are refused.'),
  /** CO2: 17O correction of the 45 and 46 ratios with a named parameter set. */
  z.object({ step: z.literal('oxygen-17'), parameters: z.enum(['brand-2010']).default('brand-2010') }).strict().describe('CO2: δ13C and δ18O from δ45 and δ46, separating 12C17O16O from 13C16O16O, solved exactly with the IUPAC parameter set of Brand, Assonov & Coplen (2010).'),
  /** Drift from a repeated standard, linear in time or in position. */
  z.object({ step: z.literal('drift'), model: z.enum(['linear-time', 'linear-position']), material: materialId }).strict().describe("A linear drift in time or position fitted on a repeated standard and removed from every acquisition; the slope's uncertainty is carried as one shared term."),
  /** Normalisation to the international scale by regression on the anchor standards (one anchor: a shift only). */
  z.object({ step: z.literal('normalise'), anchors: z.array(materialId).min(1, 'needs at least one anchor standard').max(10) }).strict().describe('Normalisation to the international scale: accepted = a + b·measured fitted on the anchor standards with both their measured and accepted uncertainties (York et al. 2004); one anchor shifts only. Slope, intercept, residuals and the anchors used are reported.'),
  /** Static vacuum: each beam regressed to the time the gas was let in. */
  z.object({ step: z.literal('time-zero'), model: z.enum(['linear', 'exponential']).default('linear') }).strict().describe("Static vacuum: each beam regressed (linear or exponential) to the time the gas was let in, from the acquisitions' `cycleSeconds`."),
  /** Mass bias by a law, against an air standard in the sequence or an internal ratio of known value. */
  z.object({
    step: z.literal('mass-bias'),
    law: z.enum(['linear', 'power', 'exponential']),
    against: z.enum(['standard', 'internal']),
    material: materialId.optional(),
    /** Internal normalisation: the ratio ("38/36") whose true value is the material's. */
    ratio: z.string().max(16).optional(),
  }).strict().describe('Noble gases: mass bias by a linear, power or exponential law (Russell et al. 1978) against an air standard in the sequence (interpolated in time between the standards) or an internal ratio of known value.'),
], { error: 'must name a known step' })
export type MethodStep = z.infer<typeof methodStep>

export const methodDefinition = z.object({
  gas: z.enum(['CO2', 'N2', 'O2', 'H2', 'Ar'], { error: 'must be CO2, N2, O2, H2 or Ar' }),
  /**
   * δ of the laboratory reference gas on the international scale(s), by quantity ("δ13C").
   * CO2's δ18O is stated on the method's oxygenScale. VPDB (the default) means VPDB-CO2: the
   * gas's 18O/16O against 18R_VPDB-CO2 = 0.002088349, the ratio the 17O correction uses (Brand,
   * Assonov & Coplen, Pure Appl. Chem. 82 (2010) 1719; numerically the carbonate-equivalent δ18O
   * on VPDB). VSMOW means that same carbonate-equivalent value carried onto VSMOW by
   * δ_VSMOW = 1.03092·δ_VPDB + 30.92 (Brand et al., Pure Appl. Chem. 86 (2014) 425), which the
   * engine inverts; it is NOT the CO2 gas's own δ18O against VSMOW (≈ 41 ‰ higher, the acid
   * fractionation 1.01025 included): a gas calibrated that way must be entered on VPDB.
   */
  referenceGas: z.record(z.string().max(16), z.object({ value: finite, u: finite.min(0) }).strict()).optional(),
  /** CO2: δ18O reported on VPDB (carbonates' convention) or VSMOW. */
  oxygenScale: z.enum(['VPDB', 'VSMOW']).optional(),
  steps: z.array(methodStep).min(1, 'needs at least one step').max(16),
  acceptance: z.object({
    /** The largest |residual| a standard may have after normalisation, ‰ (or relative ‰ for ratios). */
    maxStandardResidual: finite.positive().optional(),
    /** Fewest anchor standards (distinct materials) the normalisation needs. */
    minAnchors: z.number().int().min(1).max(10).default(2),
  }).strict().default({ minAnchors: 2 }),
}).strict()
export type MethodDefinition = z.infer<typeof methodDefinition>
