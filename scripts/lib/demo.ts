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
  { email: 'integrator@northgate-water.example', name: 'Tomas Reyes', role: 'integrator', partner: 'northgate-water', password: 'demo-integrator-passphrase' },
  { email: 'viewer@arcwise.example', name: 'Priya Holm', role: 'viewer', password: 'demo-viewer-passphrase' },
]
