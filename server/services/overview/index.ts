// The console's front page: the figures each user may read.
export { overviewFor } from './overview'
