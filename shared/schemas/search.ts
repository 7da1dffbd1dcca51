import { z } from 'zod'

/** The console's search box: at least two characters (one matches too much to read). */
export const searchQuery = z.object({
  q: z.string({ error: 'is required' }).trim().min(2, 'must be at least 2 characters').max(100, 'must be at most 100 characters'),
})

/** What the search finds, in the order the palette groups it. */
export const searchKinds = ['acquisition', 'sample', 'sequence', 'instrument', 'lab', 'partner', 'delivery', 'user'] as const
export type SearchKind = (typeof searchKinds)[number]

export const searchKindLabels: Record<SearchKind, string> = {
  acquisition: 'Run',
  sample: 'Sample',
  sequence: 'Sequence',
  instrument: 'Instrument',
  lab: 'Lab',
  partner: 'Partner',
  delivery: 'Webhook message',
  user: 'User',
}
