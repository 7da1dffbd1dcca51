// The console API as the demo admin, for scripts that set things up the way a person would
// in the console (demo endpoints, benchmarks, the chaos run).
import type { Role } from '../../shared/types/roles'
import { demoUsers } from './demo'

export interface AdminClient {
  cookie: string
  /** A JSON request with the admin's session; answers the parsed body and the status. */
  call: <T = unknown>(method: string, path: string, body?: unknown) => Promise<{ status: number, body: T }>
  /** The demo partner with this slug. */
  partner: (slug: string) => Promise<{ id: string, slug: string }>
}

export async function demoAdmin(base: string): Promise<AdminClient> {
  return demoSignIn(base, 'admin')
}

/** The console API as the demo user of `role`. */
export async function demoSignIn(base: string, role: Role): Promise<AdminClient> {
  const admin = demoUsers.find(u => u.role === role)!
  const signIn = await fetch(`${base}/api/console/session`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ email: admin.email, password: admin.password }) })
  if (!signIn.ok) throw new Error(`demo ${role} sign-in answered ${signIn.status}`)
  const cookie = signIn.headers.getSetCookie().find(c => c.startsWith('nuxt-session='))!.split(';')[0]!
  const call = async <T>(method: string, path: string, body?: unknown) => {
    const res = await fetch(`${base}${path}`, { method, headers: { 'content-type': 'application/json', cookie }, body: body === undefined ? undefined : JSON.stringify(body) })
    return { status: res.status, body: await res.json() as T }
  }
  const partner = async (slug: string) => {
    const found = (await call<{ items: { id: string, slug: string }[] }>('GET', '/api/console/partners')).body.items.find(p => p.slug === slug)
    if (!found) throw new Error(`no demo partner ${slug}`)
    return found
  }
  return { cookie, call, partner }
}
