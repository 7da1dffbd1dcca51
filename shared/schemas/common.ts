import { z } from 'zod'

export const uuid = z.uuid({ error: 'must be a UUID' })
export const idParams = z.object({ id: uuid })

export const email = z
  .string({ error: 'is required' })
  .trim()
  .toLowerCase()
  .pipe(z.email({ error: 'must be an e-mail address' }).max(254))

// A short, URL-safe identifier chosen by people: "north-sea-isotopes".
export const slug = z
  .string({ error: 'is required' })
  .trim()
  .min(2, 'must be at least 2 characters')
  .max(48, 'must be at most 48 characters')
  .regex(/^[a-z0-9]+(?:-[a-z0-9]+)*$/, 'may hold only lower-case letters, digits and single hyphens')

export const displayName = z
  .string({ error: 'is required' })
  .trim()
  .min(1, 'is required')
  .max(120, 'must be at most 120 characters')

/** Cursor pages: `limit` items after the opaque `cursor`. */
export const pageQuery = z.object({
  limit: z.coerce.number().int().min(1).max(200).default(50),
  cursor: z.string().max(200).optional(),
})

/** An RFC 9457 problem document as Arcwise sends it. */
export const problemDocument = z.object({
  type: z.string(),
  title: z.string(),
  status: z.number().int(),
  detail: z.string().optional(),
  instance: z.string().optional(),
  errors: z.array(z.object({ path: z.string(), message: z.string() })).optional(),
})
export type ProblemDocument = z.infer<typeof problemDocument>
