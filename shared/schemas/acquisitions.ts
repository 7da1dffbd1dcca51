import { z } from 'zod'
import { referenceRatios } from '../engine/ratios'
import { slug } from './common'
import { measuredSpecies } from './instruments'

// Acquisition schema v1: what a lab system posts. The shape of the raw readings follows
// the engine's RawReadings; everything Arcwise decides (lab, status, versions) is absent
// on purpose, and `.strict()` refuses a body that tries to set it.

/** The most points one column may hold (mzML arrays inflate to at most this many 64-bit floats). */
export const MAX_POINTS = 2_000_000

const finiteNumber = z.number({ error: 'must be a finite number' }).finite('must be a finite number')

const setting = z.object({
  value: finiteNumber,
  unit: z.string({ error: 'is required' }).min(1, 'is required').max(16),
  u: finiteNumber.min(0, 'cannot be negative').optional(),
}).strict()

export const acquisitionInput = z.object({
  instrument: slug,
  runId: z.string({ error: 'is required' }).trim().min(1, 'is required').max(128),
  acquiredAt: z.iso.datetime({ offset: true, error: 'must be an ISO 8601 date and time with an offset, e.g. 2026-11-30T14:05:00Z' }),
  sampleRef: z.string().trim().max(200).optional(),
  // An object of known names, not a record: a record passes `__proto__` by unnoticed.
  settings: z.object({ acceleratingVoltage: setting.optional(), field: setting.optional(), plateVoltage: setting.optional(), filterField: setting.optional() }).strict().default({}),
  sweep: z.object({
    reading: z.enum(['field', 'acceleratingVoltage']),
    unit: z.string().min(1).max(16),
    u: finiteNumber.min(0).optional(),
    values: z.array(finiteNumber).min(2, 'a sweep needs at least 2 points').max(MAX_POINTS),
  }).strict().optional(),
  detectors: z.array(z.object({
    collector: z.string().max(32).optional(),
    unit: z.string({ error: 'is required' }).min(1).max(16)
      .describe('A, mA, µA, nA, pA, fA (current); V, mV, µV (a Faraday amplifier\'s output, through the resistor registered for the collector); cps (count rate); counts (with `dwell`)'),
    values: z.array(finiteNumber).min(1).max(MAX_POINTS),
    dwell: z.object({
      value: finiteNumber.positive('must be greater than zero'),
      unit: z.enum(['s', 'ms', 'us', 'µs', 'ns'], { error: 'must be s, ms, us, µs or ns' }),
    }).strict().optional().describe('dwell time per point: required when `unit` is counts'),
    baseline: z.array(finiteNumber).min(1).max(MAX_POINTS).optional()
      .describe('static readings: on-peak-zero or off-peak readings in the same unit, one per cycle (subtracted cycle by cycle) or a block (its mean subtracted, its standard error propagated)'),
  }).strict()).max(32).default([]),
  cycleSeconds: z.array(finiteNumber.min(0, 'cannot be negative')).min(2, 'needs one time per cycle, at least two cycles').max(100_000).optional()
    .describe('static readings in static vacuum: seconds since the gas was let in, one per cycle, in cycle order and as many as each detector column has values; lets a method regress the beams to the inlet time (time-zero)'),
  /** A spectrum already in m/z from the instrument's own software (as mzML carries it). */
  mzSpectrum: z.object({
    unit: z.string().min(1).max(16),
    mz: z.array(finiteNumber).min(2, 'a spectrum needs at least 2 points').max(MAX_POINTS),
    values: z.array(finiteNumber).min(2).max(MAX_POINTS),
  }).strict().optional(),
  /**
   * What the acquisition knows of its baseline: m/z ranges free of peaks, or on-peak-zero
   * readings (beam off or deflected) per detector, in that detector's unit. Without either,
   * the engine estimates the baseline from the points outside the peaks it finds.
   */
  baseline: z.object({
    regions: z.array(z.object({
      mzFrom: finiteNumber.positive('must be greater than zero'),
      mzTo: finiteNumber.positive('must be greater than zero'),
    }).strict().refine(r => r.mzTo > r.mzFrom, { message: 'mzTo must be greater than mzFrom', path: ['mzTo'] })).min(1).max(32).optional(),
    zero: z.array(z.object({
      collector: z.string().max(32).optional(),
      unit: z.string({ error: 'is required' }).min(1).max(16),
      values: z.array(finiteNumber).min(1, 'needs at least one reading').max(100_000),
    }).strict()).min(1).max(32).optional(),
  }).strict().optional(),
  processing: z.object({
    /** Species measured in this acquisition (labels, or element symbols): other candidates are not considered. Overrides the instrument's registered list. */
    measuredSpecies: measuredSpecies.optional(),
    tolerancePpm: z.number().positive().max(10_000).optional(),
    isotopes: z.boolean().optional(),
    maxCharge: z.number().int().min(1).max(3).optional(),
    formulas: z.array(z.string().min(1).max(64)).max(100).optional(),
    references: z.array(z.object({
      id: z.string().trim().min(1).max(64),
      name: z.string().trim().min(1).max(200),
      sticks: z.array(z.object({ mz: z.number().positive().finite(), intensity: z.number().min(0).finite() }).strict()).min(1).max(1000),
    }).strict()).max(50).optional()
      .describe('reference stick spectra (m/z, relative intensity) to rank this spectrum against: cosine similarity of peak heights normalised to the tallest, in 0.5 m/z bins'),
    monteCarlo: z.boolean().optional()
      .describe('true: each ratio of two profile peaks also gets its 95 % coverage interval by GUM Supplement 1 Monte Carlo (JCGM 101:2008; 2·10^5 trials, tens of ms a ratio)'),
    engine: z.enum(['1.x', '2.x'], { error: 'must be 1.x or 2.x' }).optional()
      .describe('2.x (default): CODATA 2022 and relativistic momentum; 1.x: CODATA 2018, non-relativistic, as engine 1.0.0 computed'),
    ratios: z.array(z.object({
      id: z.enum(Object.keys(referenceRatios) as [keyof typeof referenceRatios, ...(keyof typeof referenceRatios)[]]),
      heavy: z.string().max(64).optional(),
      light: z.string().max(64).optional(),
    }).strict()).max(20).optional(),
  }).strict().optional(),
}).strict().superRefine((v, ctx) => {
  if (v.mzSpectrum) {
    if (v.sweep) ctx.addIssue({ code: 'custom', path: ['sweep'], message: 'give either a sweep or an m/z spectrum, not both' })
    if (v.mzSpectrum.values.length !== v.mzSpectrum.mz.length) ctx.addIssue({ code: 'custom', path: ['mzSpectrum', 'values'], message: `has ${v.mzSpectrum.values.length} points, mz has ${v.mzSpectrum.mz.length}` })
  }
  else if (!v.detectors.length) ctx.addIssue({ code: 'custom', path: ['detectors'], message: 'at least one detector column is required' })
  if (v.baseline?.zero && v.baseline.zero.length > 1) {
    const collectors = new Set(v.detectors.map((d, i) => d.collector ?? String(i)))
    v.baseline.zero.forEach((z, i) => {
      if (!z.collector) ctx.addIssue({ code: 'custom', path: ['baseline', 'zero', i, 'collector'], message: 'is required when several zero columns are given' })
      else if (!collectors.has(z.collector)) ctx.addIssue({ code: 'custom', path: ['baseline', 'zero', i, 'collector'], message: `no detector column has collector "${z.collector}"` })
    })
  }
  if (v.cycleSeconds) {
    const t = v.cycleSeconds
    if (v.sweep || v.mzSpectrum) ctx.addIssue({ code: 'custom', path: ['cycleSeconds'], message: 'only static readings have cycles; a sweep or an m/z spectrum has none' })
    v.detectors.forEach((d, i) => {
      if (d.values.length !== t.length) ctx.addIssue({ code: 'custom', path: ['cycleSeconds'], message: `has ${t.length} times, detectors[${i}] has ${d.values.length} cycles` })
    })
    const back = t.findIndex((x, i) => i > 0 && !(x > t[i - 1]!))
    if (back > 0) ctx.addIssue({ code: 'custom', path: ['cycleSeconds', back], message: 'must be later than the previous cycle' })
  }
  const n = v.sweep?.values.length
  v.detectors.forEach((d, i) => {
    if (d.unit.trim() === 'counts' && !d.dwell) ctx.addIssue({ code: 'custom', path: ['detectors', i, 'dwell'], message: 'raw counts need the dwell time per point' })
    if (n !== undefined && d.values.length !== n) {
      ctx.addIssue({ code: 'custom', path: ['detectors', i, 'values'], message: `has ${d.values.length} points, the sweep has ${n}` })
    }
  })
})
export type AcquisitionInput = z.infer<typeof acquisitionInput>

export const acquisitionListQuery = z.object({
  instrument: slug.optional(),
  status: z.enum(['processed', 'failed']).optional(),
  from: z.iso.datetime({ offset: true }).optional(),
  to: z.iso.datetime({ offset: true }).optional(),
  /** Newest first by when Arcwise received it (default) or by when the instrument acquired it. */
  sort: z.enum(['received', 'acquired'], { error: 'must be received or acquired' }).default('received'),
  limit: z.coerce.number().int().min(1).max(200).default(50),
  cursor: z.string().max(200).optional(),
})
