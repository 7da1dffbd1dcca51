// An instrument's geometry versions and calibrations on one timeline, ordered by when each
// became valid (not by version number: a version registered later may be valid from an earlier
// or a later day), each with the span of acquisition times it applies to and the one of each
// kind in force now marked. Ingest picks by the same rule (instrumentContextAt): the latest
// valid from at or before the acquisition's time; a calibration fitted under another geometry
// version than the one in force at that time is retired and not applied.

export interface TimelineGeometry { id: string, version: number, validFrom: string | Date }
export interface TimelineCalibration { id: string, version: number, validFrom: string | Date, geometryVersion: number | null, retired?: boolean }

export interface TimelineEntry {
  kind: 'geometry' | 'calibration'
  id: string
  version: number
  validFrom: Date
  /** When the next version of the same kind takes over; null while none does. */
  validUntil: Date | null
  /** The version of this kind that ingest applies to an acquisition made now. */
  inForce: boolean
  /** Valid from a time still to come. */
  future: boolean
  /** For a calibration: the geometry version it was fitted under. */
  geometryVersion: number | null
  retired: boolean
}

const byValidity = <T extends { validFrom: Date, version: number }>(a: T, b: T) => +b.validFrom - +a.validFrom || b.version - a.version

export function instrumentTimeline(geometries: TimelineGeometry[], calibrations: TimelineCalibration[], now = new Date()): TimelineEntry[] {
  const spans = <T extends { id: string, version: number, validFrom: string | Date }>(kind: TimelineEntry['kind'], rows: T[], extra: (r: T) => Pick<TimelineEntry, 'geometryVersion' | 'retired'>) => {
    const sorted = rows.map(r => ({ ...r, validFrom: new Date(r.validFrom) })).sort(byValidity)
    const current = sorted.find(r => r.validFrom <= now && !extra(r).retired)
    return sorted.map((r, i): TimelineEntry => {
      // The next newer version of this kind (the list is newest first) ends this one's span.
      const newer = sorted.slice(0, i).filter(n => +n.validFrom > +r.validFrom).at(-1)
      return { kind, id: r.id, version: r.version, validFrom: r.validFrom, validUntil: newer?.validFrom ?? null, inForce: r.id === current?.id, future: r.validFrom > now, ...extra(r) }
    })
  }
  return [
    ...spans('geometry', geometries, () => ({ geometryVersion: null, retired: false })),
    ...spans('calibration', calibrations, c => ({ geometryVersion: c.geometryVersion, retired: !!c.retired })),
  ].sort((a, b) => byValidity(a, b) || (a.kind === 'geometry' ? 1 : -1))
}

/** What an entry applies to, in words. */
export function appliesTo(e: TimelineEntry, format: (d: Date) => string): string {
  if (e.retired) return `Fitted under geometry v${e.geometryVersion}, which is no longer in force: acquisitions made now are not corrected by it.`
  const span = e.validUntil ? `acquired from ${format(e.validFrom)} until ${format(e.validUntil)}` : `acquired from ${format(e.validFrom)} on`
  return e.kind === 'geometry'
    ? `Converts readings to m/z for acquisitions ${span}.`
    : `Corrects m/z${e.geometryVersion ? ` (with geometry v${e.geometryVersion})` : ''} for acquisitions ${span}.`
}
