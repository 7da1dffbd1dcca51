import { sql } from 'drizzle-orm'
import { can, isLabScoped, type SessionUser } from '#shared/types/roles'

// The console's notifications: what needs a person, derived from the data each time they are
// read. A notification is a state (an endpoint is disabled, results wait), not a message: it
// goes away when the state is fixed, so nothing is stored and nothing can fall out of step
// with the data; which ones a person has already seen is kept by their browser (the bell).
// Scoped by role exactly as the home is (overview/home.ts).

/** Control-chart violations are news for this long (common practice, no source). */
const VIOLATION_DAYS = 30
/** Dead deliveries within this window are listed. */
const DEAD_DAYS = 14

export interface Notification {
  /** Stable while the state lasts, so the browser can remember it was seen. */
  key: string
  kind: 'endpoint-disabled' | 'deliveries-dead' | 'review-waiting' | 'chart-violation'
  title: string
  detail: string
  at: string
  link: string
}

const iso = (d: Date | string) => new Date(d).toISOString()
const days = (n: number) => sql`${`${n} days`}::interval`

type EndpointRow = { id: string, partner_id: string, partner: string, url: string, reason: string | null, at: Date }
type DeadRow = { partner_id: string, partner: string, n: number, at: Date }
type ViolationRow = { lab_id: string, lab: string, instrument_id: string, instrument: string, material: string, quantity: string, rules: string[], at: Date }

/** Disabled endpoints: of one partner, of the partners a lab grants (those taking its results), or all. */
function disabledEndpoints(scope: { partnerId?: string, labId?: string }) {
  const where = scope.partnerId
    ? sql`e.partner_id = ${scope.partnerId}::uuid`
    : scope.labId
      ? sql`exists (select 1 from grants g where g.partner_id = e.partner_id and g.lab_id = ${scope.labId}::uuid) and (cardinality(e.lab_ids) = 0 or ${scope.labId}::uuid = any(e.lab_ids))`
      : sql`true`
  return useDb().execute<EndpointRow>(sql`
    select e.id, e.partner_id, p.name as partner, e.url, e.disabled_reason as reason, e.updated_at as at
    from webhook_endpoints e join partners p on p.id = e.partner_id
    where e.status = 'disabled' and ${where} order by e.updated_at desc limit 20`)
}

/** Dead deliveries of events per partner: one partner's, those of a lab's events, or all. */
function deadByPartner(scope: { partnerId?: string, labId?: string }) {
  const where = scope.partnerId ? sql`e.partner_id = ${scope.partnerId}::uuid` : scope.labId ? sql`ev.lab_id = ${scope.labId}::uuid` : sql`true`
  return useDb().execute<DeadRow>(sql`
    select e.partner_id, p.name as partner, count(*)::int as n, max(coalesce(d.finished_at, d.created_at)) as at
    from deliveries d join webhook_endpoints e on e.id = d.endpoint_id join partners p on p.id = e.partner_id join events ev on ev.id = d.event_id
    where d.status = 'dead' and d.created_at > now() - ${days(DEAD_DAYS)} and ${where}
    group by e.partner_id, p.name order by at desc limit 20`)
}

/** Each chart's latest violating point in the window: of one lab or of all. */
function chartViolations(labId: string | null) {
  return useDb().execute<ViolationRow>(sql`
    select distinct on (p.instrument_id, p.material, p.quantity) p.lab_id, l.name as lab, p.instrument_id, i.name as instrument, p.material, p.quantity, p.violations as rules, p.at
    from control_points p join labs l on l.id = p.lab_id join instruments i on i.id = p.instrument_id
    where cardinality(p.violations) > 0 and p.at > now() - ${days(VIOLATION_DAYS)} ${labId ? sql`and p.lab_id = ${labId}::uuid` : sql``}
    order by p.instrument_id, p.material, p.quantity, p.at desc limit 20`)
}

/** What needs this person, newest first. */
export async function notificationsFor(user: SessionUser): Promise<{ items: Notification[] }> {
  const items: Notification[] = []
  const lab = isLabScoped(user.role) ? user.labId : null
  const partner = user.role === 'integrator' ? user.partnerId : null
  // A scoped role without its lab or partner sees nothing rather than everything.
  if ((isLabScoped(user.role) && !lab) || (user.role === 'integrator' && !partner)) return { items }
  const scope = lab ? { labId: lab } : partner ? { partnerId: partner } : {}
  // Where a person fixes it: a partner's own pages for those who read partners, the lab's
  // partner access page for a lab's people (they cannot open a partner).
  const partnerLink = (partnerId: string, tail: string) => lab ? `/console/labs/${lab}/access` : `/console/partners/${partnerId}/${tail}`

  for (const e of await disabledEndpoints(scope)) {
    items.push({
      key: `endpoint-disabled:${e.id}:${iso(e.at)}`, kind: 'endpoint-disabled', at: iso(e.at), link: partnerLink(e.partner_id, 'webhooks'),
      title: `Webhook endpoint disabled: ${e.partner}`,
      detail: `${e.url}${e.reason ? ` — ${e.reason}` : ''}${lab ? '. Your released results are not reaching it.' : ''}`,
    })
  }
  for (const d of await deadByPartner(scope)) {
    items.push({
      key: `deliveries-dead:${d.partner_id}:${d.n}:${iso(d.at)}`, kind: 'deliveries-dead', at: iso(d.at), link: partnerLink(d.partner_id, 'deliveries?status=dead'),
      title: `${d.n} dead ${d.n === 1 ? 'delivery' : 'deliveries'} to ${d.partner}`,
      detail: lab ? `Results of your lab did not reach ${d.partner} in the last ${DEAD_DAYS} days.` : `Every retry failed in the last ${DEAD_DAYS} days; replay them once the receiver is fixed.`,
    })
  }
  if (lab && can(user.role, 'results:review')) {
    const [q] = await useDb().execute<{ results: number, sequences: number, oldest: Date | null }>(sql`
      select (select count(*)::int from results r where r.lab_id = ${lab}::uuid and r.review_state = 'held'
                and not exists (select 1 from results n where n.id = r.superseded_by and n.review_state <> 'rejected')) as results,
        (select count(*)::int from sequences s where s.lab_id = ${lab}::uuid and s.status = 'processed' and s.review_state = 'held') as sequences,
        (select min(r.created_at) from results r where r.lab_id = ${lab}::uuid and r.review_state = 'held') as oldest`)
    if (q && (q.results || q.sequences)) {
      const parts = [q.results ? `${q.results} ${q.results === 1 ? 'result' : 'results'}` : '', q.sequences ? `${q.sequences} ${q.sequences === 1 ? 'sequence' : 'sequences'}` : ''].filter(Boolean)
      items.push({
        key: `review-waiting:${lab}:${q.results}:${q.sequences}`, kind: 'review-waiting', at: iso(q.oldest ?? new Date()), link: `/console/labs/${lab}/review`,
        title: `${parts.join(' and ')} waiting for review`, detail: 'Partners receive nothing until they are released.',
      })
    }
  }
  if (!partner) {
    for (const v of await chartViolations(lab)) {
      items.push({
        key: `chart-violation:${v.instrument_id}:${v.material}:${v.quantity}:${iso(v.at)}`, kind: 'chart-violation', at: iso(v.at),
        link: `/console/labs/${v.lab_id}/control-charts/${v.instrument_id}?material=${encodeURIComponent(v.material)}&quantity=${encodeURIComponent(v.quantity)}`,
        title: `Control chart out of control: ${v.material} ${v.quantity}`,
        detail: `${v.instrument}${lab ? '' : ` · ${v.lab}`}: rule ${v.rules.join(', ')} on ${iso(v.at).slice(0, 10)}`,
      })
    }
  }
  items.sort((a, b) => b.at.localeCompare(a.at))
  return { items }
}
