import { z } from 'zod'
import { acquisitionInput } from './acquisitions'
import { acquisitionView, resultCorrectedData, resultRetractedData } from './responses'
import { sequenceEventData } from './sequences'

/** The exchange schemas Arcwise speaks, by name and version: the zod schema each is made from. */
export const exchangeSchemaSources = {
  'acquisition': { 1: acquisitionInput },
  // v2 adds processed sequences (`sequence.processed`): per sample the δ normalised to the
  // international scale, with u, k, the raw δ, the method version and the standards; and the
  // review lifecycle's `result.corrected` (the result with `correction`) and `result.retracted`
  // (kind 'retraction'). v1 describes neither: those events go to endpoints on v2 or later.
  'result-event': { 1: acquisitionView, 2: z.union([acquisitionView, resultCorrectedData, resultRetractedData, sequenceEventData]) },
} as const

/**
 * Versions a new registry starts deprecated, with their sunset (a registry that has them
 * already is changed by migration 0013; an admin's later change of status stands).
 */
export const exchangeSchemaDeprecations: Partial<Record<ExchangeSchemaName, Record<number, { sunsetAt: string }>>> = {
  'result-event': { 1: { sunsetAt: '2027-06-30T00:00:00Z' } },
}
export type ExchangeSchemaName = keyof typeof exchangeSchemaSources

export const exchangeSchemaNames = Object.keys(exchangeSchemaSources) as [ExchangeSchemaName, ...ExchangeSchemaName[]]

export const schemaParams = z.object({ name: z.enum(exchangeSchemaNames), version: z.coerce.number().int().positive() })

export const schemaDeprecation = z.object({
  status: z.enum(['current', 'deprecated', 'retired']),
  sunsetAt: z.coerce.date({ error: 'must be a date' }).nullish(),
}).strict().refine(v => v.status !== 'deprecated' || !!v.sunsetAt, { path: ['sunsetAt'], message: 'a deprecated version needs a sunset date' })
