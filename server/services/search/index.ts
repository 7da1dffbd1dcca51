// The console's search: run ids, samples, sequences, instruments, labs, partners, webhook-ids
// and users, each within what the signed-in user may read.
export { searchConsole } from './search'
