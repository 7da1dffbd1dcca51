import { z } from 'zod'
import { displayName, email, slug } from './common'

export const labInput = z.object({
  slug,
  name: displayName,
  site: z.string({ error: 'is required' }).trim().min(1, 'is required').max(120),
  contactEmail: email,
  // Days the raw data of the lab's acquisitions is kept after receipt; null keeps it forever (issue 23).
  rawRetentionDays: z.number({ error: 'must be a whole number of days, or null to keep raw data forever' }).int('must be a whole number of days').min(1, 'must be at least 1 day').max(36_500, 'at most 36,500 days (100 years); null keeps it forever').nullable().optional(),
})
export type LabInput = z.infer<typeof labInput>
export const labUpdate = labInput.partial().refine(v => Object.keys(v).length > 0, 'change at least one field')

export const partnerKinds = ['client_lab', 'regulator', 'data_team', 'proficiency_test'] as const
export const partnerKindLabels: Record<(typeof partnerKinds)[number], string> = {
  client_lab: 'Client lab',
  regulator: 'Regulator',
  data_team: 'Data team',
  proficiency_test: 'Proficiency-test coordinator',
}

export const partnerInput = z.object({
  slug,
  name: displayName,
  kind: z.enum(partnerKinds, { error: `must be one of ${partnerKinds.join(', ')}` }),
  contactEmail: email,
})
export type PartnerInput = z.infer<typeof partnerInput>
export const partnerUpdate = partnerInput.partial().refine(v => Object.keys(v).length > 0, 'change at least one field')

export const auditQuery = z.object({
  action: z.string().max(60).optional(),
  // Part of the actor's name or e-mail.
  actor: z.string().max(254).optional(),
  // What the entry is about: its kind (lab, user, webhook-endpoint, …) and optionally its id.
  targetType: z.string().max(40).optional(),
  target: z.string().max(80).optional(),
  from: z.coerce.date().optional(),
  to: z.coerce.date().optional(),
  limit: z.coerce.number().int().min(1).max(200).default(50),
  cursor: z.coerce.number().int().positive().optional(),
})
