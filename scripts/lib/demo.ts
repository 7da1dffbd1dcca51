// The demo scenario: an invented consortium of labs and partners. Names, sites and people
// are made up for the demo and appear nowhere else.
import type { PartnerInput, LabInput } from '../../shared/schemas/orgs'
import type { Role } from '../../shared/types/roles'

export const demoLabs: LabInput[] = [
  { slug: 'saltmarsh-isotopes', name: 'Saltmarsh Stable Isotope Lab', site: 'Estuary Field Station, Site A', contactEmail: 'lab@saltmarsh.example' },
  { slug: 'halvard-ridge', name: 'Halvard Ridge Geochronology', site: 'Ridge Campus, Site B', contactEmail: 'ops@halvard-ridge.example' },
  { slug: 'kestrel-leaktest', name: 'Kestrel Leak-Test Services', site: 'Harbour Works, Site C', contactEmail: 'desk@kestrel-leak.example' },
]

export const demoPartners: PartnerInput[] = [
  { slug: 'northgate-water', name: 'Northgate Water Authority', kind: 'regulator', contactEmail: 'data@northgate-water.example' },
  { slug: 'tidewater-clinical', name: 'Tidewater Clinical Research', kind: 'client_lab', contactEmail: 'lims@tidewater.example' },
]

export interface DemoUser { email: string, name: string, role: Role, lab?: string, partner?: string, password: string }

export const demoUsers: DemoUser[] = [
  { email: 'admin@arcwise.example', name: 'Morgan Ashdown', role: 'admin', password: 'demo-admin-passphrase' },
  { email: 'manager@saltmarsh.example', name: 'Ines Varga', role: 'lab_manager', lab: 'saltmarsh-isotopes', password: 'demo-manager-passphrase' },
  { email: 'reviewer@saltmarsh.example', name: 'Aurelio Brandt', role: 'lab_reviewer', lab: 'saltmarsh-isotopes', password: 'demo-reviewer-passphrase' },
  { email: 'integrator@northgate-water.example', name: 'Tomas Reyes', role: 'integrator', partner: 'northgate-water', password: 'demo-integrator-passphrase' },
  { email: 'viewer@arcwise.example', name: 'Priya Holm', role: 'viewer', password: 'demo-viewer-passphrase' },
]

/**
 * Each demo lab's release rule (issue 20): the stable-isotope lab reviews everything with four
 * eyes, the geochronology lab reviews everything, and the leak-test lab releases at once what
 * raises no flag beyond those its routine work always raises (an uncalibrated bench, lines it
 * does not assign).
 */
export const demoReleaseRules: Record<string, { policy: 'review' | 'auto', allows: string[], fourEyes: boolean }> = {
  'saltmarsh-isotopes': { policy: 'review', allows: [], fourEyes: true },
  'halvard-ridge': { policy: 'review', allows: [], fourEyes: false },
  'kestrel-leaktest': { policy: 'auto', allows: ['uncalibrated', 'unassigned', 'low-signal', 'overlapping'], fourEyes: false },
}

/**
 * Every QC flag code the engine raises on a result (shared/engine/pipeline.ts) and on a
 * sequence's outcome (shared/engine/isotopes, server/services/sequences). A lab that allows
 * them all under the 'auto' policy releases everything at once, as results flowed before
 * review existed: the benchmarks, the soak and most tests use such labs.
 */
export const everyQcCode = [
  'ambiguous', 'area-window-cut', 'baseline-guessed', 'calibration-retired', 'cycles-rejected', 'dead-time-not-corrected', 'external-mz', 'fit-failed',
  'low-signal', 'no-peaks', 'outside-calibration', 'overlapping', 'ratio-missing', 'unassigned', 'uncalibrated',
  'anchor-scatter', 'control-chart-violation', 'extrapolated', 'mass-bias-not-bracketed', 'no-h3-correction', 'not-normalised', 'ratio-not-positive',
  'reproducibility-unknown', 'shift-only', 'single-blank', 'standard-residual', 'standard-residual-exceeds', 'too-few-anchors',
]
