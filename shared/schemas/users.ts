import { z } from 'zod'
import { isLabScoped, roleLabels, roles } from '../types/roles'
import { displayName, email, uuid } from './common'

const role = z.enum(roles, { error: `must be one of ${roles.join(', ')}` })

/**
 * A role with its scope: a lab manager or lab reviewer names one lab, an integrator one partner, and
 * the other roles name neither.
 */
export const roleAssignment = z
  .object({
    role,
    labId: uuid.nullish(),
    partnerId: uuid.nullish(),
  })
  .superRefine((v, ctx) => {
    if (isLabScoped(v.role) && !v.labId) ctx.addIssue({ code: 'custom', path: ['labId'], message: `a ${roleLabels[v.role].toLowerCase()} needs a lab` })
    if (v.role === 'integrator' && !v.partnerId) ctx.addIssue({ code: 'custom', path: ['partnerId'], message: 'an integrator needs a partner' })
    if (!isLabScoped(v.role) && v.labId) ctx.addIssue({ code: 'custom', path: ['labId'], message: 'only a lab manager or lab reviewer has a lab' })
    if (v.role !== 'integrator' && v.partnerId) ctx.addIssue({ code: 'custom', path: ['partnerId'], message: 'only an integrator has a partner' })
  })
  .transform(v => ({ role: v.role, labId: v.labId ?? null, partnerId: v.partnerId ?? null }))
export type RoleAssignment = z.infer<typeof roleAssignment>

export const invitationInput = z.intersection(z.object({ email, name: displayName.optional() }), roleAssignment)
export type InvitationInput = z.infer<typeof invitationInput>

export const userUpdate = z.intersection(
  z.object({ status: z.enum(['active', 'disabled']).optional() }),
  roleAssignment,
)
export type UserUpdate = z.infer<typeof userUpdate>
