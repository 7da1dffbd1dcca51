import { z } from 'zod'
import { email } from './common'

// A few of the most used passwords (common practice, no source): refused even when long enough.
const commonPasswords = new Set([
  'password1234', 'passwordpassword', '123456789012', 'qwertyuiopas', 'letmeinletmein',
  'administrator', 'iloveyou1234', 'welcome12345', 'changeme1234',
])

/** Passwords: 12 to 200 characters, not one repeated character, not a well-known password. */
export const newPassword = z
  .string({ error: 'is required' })
  .min(12, 'must be at least 12 characters')
  .max(200, 'must be at most 200 characters')
  .refine(p => new Set(p).size > 3, 'needs more than three different characters')
  .refine(p => !commonPasswords.has(p.toLowerCase()), 'is too common; choose another')

export const signInInput = z.object({
  email,
  password: z.string({ error: 'is required' }).min(1, 'is required').max(200),
})
export type SignInInput = z.infer<typeof signInInput>

export const passwordResetRequest = z.object({ email })

export const tokenParams = z.object({
  token: z.string().regex(/^[A-Za-z0-9_-]{43}$/, 'is not a valid link token'),
})

export const passwordResetCompletion = z.object({ password: newPassword })

export const invitationAcceptance = z.object({
  name: z.string({ error: 'is required' }).trim().min(1, 'is required').max(120),
  password: newPassword,
})
