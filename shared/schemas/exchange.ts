import { z } from 'zod'
import { acquisitionInput } from './acquisitions'
import { acquisitionView } from './responses'

/** The exchange schemas Arcwise speaks, by name and version: the zod schema each is made from. */
export const exchangeSchemaSources = {
  'acquisition': { 1: acquisitionInput },
  'result-event': { 1: acquisitionView },
} as const
export type ExchangeSchemaName = keyof typeof exchangeSchemaSources

export const exchangeSchemaNames = Object.keys(exchangeSchemaSources) as [ExchangeSchemaName, ...ExchangeSchemaName[]]

export const schemaParams = z.object({ name: z.enum(exchangeSchemaNames), version: z.coerce.number().int().positive() })

export const schemaDeprecation = z.object({
  status: z.enum(['current', 'deprecated', 'retired']),
  sunsetAt: z.coerce.date({ error: 'must be a date' }).nullish(),
}).strict().refine(v => v.status !== 'deprecated' || !!v.sunsetAt, { path: ['sunsetAt'], message: 'a deprecated version needs a sunset date' })
