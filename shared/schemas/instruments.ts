import { z } from 'zod'
import { geometry } from '../engine/geometry'
import { displayName, slug } from './common'

/**
 * The species an instrument measures, as engine species labels ('CO2', '[13C]O2', '[40Ar]')
 * or element symbols: assignment then considers no other candidate, so a rival line this
 * instrument never sees cannot flag a peak as ambiguous.
 */
export const measuredSpecies = z.array(z.string().trim().min(1, 'must not be empty').max(64)).max(100)
  .refine(list => new Set(list).size === list.length, { message: 'lists a species twice' })

/** A new instrument: its first geometry version is valid from `validFrom` (default now). */
export const instrumentInput = z.object({
  slug,
  name: displayName,
  geometry,
  validFrom: z.coerce.date({ error: 'must be a date and time' }).optional(),
  measuredSpecies: measuredSpecies.optional(),
}).strict()
export type InstrumentInput = z.infer<typeof instrumentInput>

/** A change of an instrument's name or measured species (at least one; null clears the species list). */
export const instrumentUpdate = z.object({
  name: displayName.optional(),
  measuredSpecies: measuredSpecies.nullable().optional()
    .describe('Species this instrument measures; null or an empty list: every candidate'),
}).strict().refine(u => u.name !== undefined || u.measuredSpecies !== undefined, { message: 'change the name or the measured species', path: ['name'] })
export type InstrumentUpdate = z.infer<typeof instrumentUpdate>

/** A change of geometry: a new version, valid from a given time. */
export const geometryVersionInput = z.object({
  geometry,
  validFrom: z.coerce.date({ error: 'must be a date and time' }),
  note: z.string().trim().max(500).optional(),
}).strict()

export const calibrationInput = z.object({
  degree: z.number().int().min(1).max(3),
  points: z.array(z.object({
    measuredMz: z.number().positive(),
    referenceMz: z.number().positive(),
    label: z.string().max(40).optional(),
    /** Standard uncertainties (m/z): given for every point, the fit is weighted by 1/u². */
    measuredU: z.number().min(0).finite().optional(),
    referenceU: z.number().min(0).finite().optional(),
  }).strict()).min(1).max(200),
  validFrom: z.coerce.date({ error: 'must be a date and time' }),
  /**
   * The geometry version the reference peaks were measured under (a preview names it);
   * omitted, the version in force at `validFrom` (or the first, if none was yet).
   */
  geometryVersion: z.number().int().positive().optional(),
}).strict()

export const keyScopes = ['acquisitions:write', 'results:read'] as const
export type KeyScope = (typeof keyScopes)[number]

export const apiKeyInput = z.object({
  name: displayName,
  scopes: z.array(z.enum(keyScopes, { error: `must be one of ${keyScopes.join(', ')}` })).min(1, 'choose at least one scope')
    .transform(s => [...new Set(s)]),
  expiresAt: z.coerce.date({ error: 'must be a date and time' })
    .refine(d => d.getTime() > Date.now(), 'must be in the future').nullish(),
}).strict()
export type ApiKeyInput = z.infer<typeof apiKeyInput>

export const labParams = z.object({ id: z.uuid() })
export const labInstrumentParams = z.object({ id: z.uuid(), instrumentId: z.uuid() })
export const labKeyParams = z.object({ id: z.uuid(), keyId: z.uuid() })

/**
 * A calibration proposed from a reference acquisition: its peaks, found with the geometry
 * alone and assigned within `tolerancePpm`, become the reference points. Wider than the
 * ingest default (50 ppm), since an instrument that needs calibrating is off by more.
 */
export const calibrationFromReferenceInput = z.object({
  acquisitionId: z.uuid({ error: 'must be the id of an acquisition of this instrument' }),
  degree: z.number().int().min(1, 'must be 1, 2 or 3').max(3, 'must be 1, 2 or 3'),
  tolerancePpm: z.number().positive().max(10_000).default(200),
}).strict()
export type CalibrationFromReferenceInput = z.infer<typeof calibrationFromReferenceInput>

export const labAcquisitionParams = z.object({ id: z.uuid(), acquisitionId: z.uuid() })
