// Organisations: labs and partners, as the console lists and edits them.
export { listOrgs, getOrg, createOrg, updateOrg } from './orgs'
