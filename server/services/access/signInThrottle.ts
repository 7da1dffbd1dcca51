import { RateLimiterDrizzle, RateLimiterRes } from 'rate-limiter-flexible'
import { rateLimits } from '../../database/schema'

// Failed sign-ins are counted per e-mail (known or not, so a lockout reveals nothing) and
// per client address, in PostgreSQL so the count holds across app processes.
let byEmail: RateLimiterDrizzle | undefined
let byIp: RateLimiterDrizzle | undefined

function limiters() {
  const { signIn } = useRuntimeConfig()
  byEmail ??= new RateLimiterDrizzle({
    storeClient: useDb(), schema: rateLimits, keyPrefix: 'signin-email',
    // The maxFailures-th failure is the one that crosses `points` and locks.
    points: Number(signIn.maxFailures) - 1, duration: 60 * 60, blockDuration: Number(signIn.lockMinutes) * 60,
  })
  byIp ??= new RateLimiterDrizzle({
    storeClient: useDb(), schema: rateLimits, keyPrefix: 'signin-ip',
    points: 100, duration: 60 * 60, blockDuration: 15 * 60,
  })
  return { byEmail, byIp }
}

export interface ThrottleState { locked: boolean, retryAfterSeconds: number, failures: number }

function stateOf(res: RateLimiterRes | null, points: number): ThrottleState {
  if (!res) return { locked: false, retryAfterSeconds: 0, failures: 0 }
  return { locked: res.consumedPoints > points, retryAfterSeconds: Math.ceil(res.msBeforeNext / 1000), failures: res.consumedPoints }
}

export async function signInLockState(email: string, ip: string): Promise<ThrottleState> {
  const { byEmail, byIp } = limiters()
  const [e, i] = await Promise.all([byEmail.get(email), byIp.get(ip)])
  const emailState = stateOf(e, byEmail.points)
  return emailState.locked ? emailState : stateOf(i, byIp.points)
}

/** Counts one failure; tells whether this failure locked the e-mail. */
export async function recordSignInFailure(email: string, ip: string): Promise<ThrottleState & { justLocked: boolean }> {
  const { byEmail, byIp } = limiters()
  const consume = (l: RateLimiterDrizzle, key: string) => l.consume(key).catch((r: unknown) => {
    if (r instanceof RateLimiterRes) return r
    throw r
  })
  const [e] = await Promise.all([consume(byEmail, email), consume(byIp, ip)])
  const state = stateOf(e, byEmail.points)
  return { ...state, justLocked: e.consumedPoints === byEmail.points + 1 }
}

export async function clearSignInFailures(email: string) {
  await limiters().byEmail.delete(email)
}

/** Seconds to hold a failed answer: doubles with each failure, at most 2 s (common practice, no source). */
export function failureDelayMs(failures: number): number {
  return Math.min(2000, 100 * 2 ** Math.max(0, failures - 1))
}
