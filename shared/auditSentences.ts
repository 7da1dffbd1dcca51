import { roleLabels, type Role } from './types/roles'

// The audit log read as sentences with names (issue 21, point 7). The server resolves the ids
// an entry names (its actor, its target, the lab and partner in its detail) into `AuditNames`;
// this module only writes the sentence, so the console and the CSV export say the same thing.

/** Names resolved for one entry; `names` maps any id the detail holds (lab, partner) to a name. */
export interface AuditNames {
  actor: string
  target: string | null
  names: Record<string, string>
}

export interface AuditEntryLike {
  action: string
  actorLabel: string
  targetType: string | null
  targetId: string | null
  detail: Record<string, unknown>
}

const text = (v: unknown): string | null => typeof v === 'string' && v ? v : typeof v === 'number' ? String(v) : null
const list = (v: unknown): string => Array.isArray(v) ? v.map(String).join(', ') : ''
const plural = (n: number, one: string, many: string) => `${n.toLocaleString('en')} ${n === 1 ? one : many}`
const day = (v: unknown): string | null => {
  const s = text(v)
  if (!s) return null
  const d = new Date(s)
  return Number.isNaN(d.getTime()) ? s : d.toISOString().slice(0, 16).replace('T', ' ') + ' UTC'
}
const roleName = (v: unknown): string => typeof v === 'string' && Object.hasOwn(roleLabels, v) ? roleLabels[v as Role].toLowerCase() : String(v ?? 'unknown role')

/** What an entry says, as one sentence with names (ids only where nothing names them). */
export function auditSentence(entry: AuditEntryLike, n: AuditNames): string {
  const d = entry.detail ?? {}
  const who = n.actor
  const target = n.target ?? (entry.targetId ? `${entry.targetType ?? 'item'} ${entry.targetId}` : 'something')
  const nameOf = (id: unknown): string | null => typeof id === 'string' && Object.hasOwn(n.names, id) ? n.names[id]! : text(id)
  const lab = nameOf(d.labId)
  const partner = nameOf(d.partnerId)
  const at = (place: string | null, word = 'at') => place ? ` ${word} ${place}` : ''
  const placeOf = (side: unknown) => {
    const s = side && typeof side === 'object' ? side as Record<string, unknown> : {}
    return `${roleName(s.role)}${at(nameOf(s.labId) ?? nameOf(s.partnerId), 'of')}`
  }

  switch (entry.action) {
    case 'sign-in': return `${who} signed in.`
    case 'sign-out': return `${who} signed out.`
    case 'sign-in.failed': return `A sign-in as ${entry.actorLabel} failed: wrong e-mail or password.`
    case 'sign-in.locked': return `Sign-in as ${text(d.email) ?? target} was locked for ${text(d.minutes) ?? 'some'} minutes after repeated failures.`
    case 'password.reset-requested': return `${entry.actorLabel} asked for a password reset.`
    case 'password.reset': return `${who} set a new password through a reset link.`
    case 'user.role-changed': return `${who} changed ${target} from ${placeOf(d.from)} to ${placeOf(d.to)}.`
    case 'user.disabled': return `${who} disabled the account of ${target}.`
    case 'user.enabled': return `${who} enabled the account of ${target} again.`
    case 'user.sessions-ended': return `${who} ended ${plural(Number(d.sessions ?? 0), 'session', 'sessions')} of ${target}.`
    case 'invitation.created': return `${who} invited ${text(d.email) ?? target} as ${roleName(d.role)}${at(lab ?? partner, 'of')}.`
    case 'invitation.revoked': return `${who} revoked the invitation of ${text(d.email) ?? target}.`
    case 'invitation.accepted': return `${who} accepted an invitation and joined as ${roleName(d.role)}.`
    case 'lab.created': return `${who} created the lab ${text(d.name) ?? target}.`
    case 'partner.created': return `${who} created the partner ${text(d.name) ?? target}.`
    case 'lab.updated': return `${who} changed the lab ${target}: ${list(d.changed) || 'nothing'}.`
    case 'partner.updated': return `${who} changed the partner ${target}: ${list(d.changed) || 'nothing'}.`
    case 'key.issued': return `${who} issued the API key "${text(d.name) ?? target}"${at(lab, 'for')} with ${list(d.scopes) || 'no scopes'}.`
    case 'key.revoked': return `${who} revoked the API key ${target}${at(lab, 'of')}.`
    case 'instrument.created': return `${who} registered the instrument ${target}${text(d.kind) ? ` (${text(d.kind)})` : ''}${at(lab)}.`
    case 'instrument.renamed': return `${who} renamed the instrument ${target} to "${text(d.name) ?? ''}".`
    case 'instrument.geometry-versioned': return `${who} added geometry version ${text(d.version) ?? '?'} of ${target}, valid from ${day(d.validFrom) ?? 'now'}.`
    case 'instrument.calibrated': return `${who} saved calibration version ${text(d.version) ?? '?'} of ${target}${typeof d.rmsPpm === 'number' ? ` (residual RMS ${d.rmsPpm.toPrecision(3)} ppm)` : ''}.`
    case 'acquisition.uploaded': return `${who} uploaded run ${text(d.runId) ?? target}${at(lab, 'to')}${typeof d.points === 'number' ? ` (${plural(d.points, 'point', 'points')})` : ''}.`
    case 'grant.set': return `${who} granted ${partner ?? 'a partner'} ${lab ? `${lab}'s` : 'a lab\'s'} results (${list(d.eventTypes) || 'no events'}).`
    case 'grant.revoked': return `${who} revoked ${partner ?? 'a partner'}'s grant to ${lab ? `${lab}'s` : 'a lab\'s'} results.`
    case 'endpoint.created': return `${who} added the webhook endpoint ${text(d.url) ?? target}${at(partner, 'for')}.`
    case 'endpoint.updated': return `${who} changed the webhook endpoint ${target}: ${Object.keys(d).filter(k => k !== 'partnerId').join(', ') || 'nothing'}.`
    case 'endpoint.paused': return `${who} paused the webhook endpoint ${target}.`
    case 'endpoint.resumed': return `${who} resumed the webhook endpoint ${target}.`
    case 'endpoint.deleted': return `${who} deleted the webhook endpoint ${text(d.url) ?? target}.`
    case 'endpoint.secret-revealed': return `${who} revealed the signing secret of ${target}.`
    case 'endpoint.secret-rotated': return `${who} rotated the signing secret of ${target}${typeof d.overlapHours === 'number' ? `, the old one valid ${plural(d.overlapHours, 'more hour', 'more hours')}` : ''}.`
    case 'endpoint.disabled': return `The webhook endpoint ${text(d.url) ?? target} was disabled${text(d.reason) ? `: ${text(d.reason)}` : ''}.`
    case 'delivery.replayed': return entry.targetType === 'delivery'
      ? `${who} replayed the delivery ${entry.targetId ?? ''}.`
      : `${who} replayed ${plural(Number(d.count ?? 0), 'delivery', 'deliveries')} of ${target}.`
    case 'partner-client.created': return `${who} created the API client ${text(d.clientId) ?? target}${at(partner, 'for')}.`
    case 'partner-client.revoked': return `${who} revoked the API client ${target}.`
    case 'token.issued': return `The API client ${entry.actorLabel} received an access token${text(d.scope) ? ` for ${text(d.scope)}` : ''}.`
    case 'token.refused': return `An access token was refused to ${entry.actorLabel}: ${text(d.reason) ?? 'no reason recorded'}.`
    case 'schema.status-changed': return `${who} set the exchange schema ${text(d.name) ?? target}${d.version !== undefined ? ` v${text(d.version)}` : ''} to ${text(d.status) ?? '?'}${day(d.sunsetAt) ? `, sunset ${day(d.sunsetAt)}` : ''}.`
    case 'method.version-created': return `${who} saved method version ${text(d.version) ?? '?'} for ${text(d.instrument) ?? target}${at(lab)}.`
    case 'standard.version-created': return `${who} saved working standard ${text(d.code) ?? target} version ${text(d.version) ?? '?'}${at(lab)}.`
    case 'demo.seeded': return 'The demo consortium was seeded.'
    default: {
      // Actions added later read plainly until they get their own sentence.
      const verb = entry.action.replace(/[.-]/g, ' ')
      return entry.targetId ? `${who}: ${verb}, ${target}.` : `${who}: ${verb}.`
    }
  }
}
