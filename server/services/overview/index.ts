// The console's front page: the figures each user may read, each role's home (what needs
// them now) and the notifications derived from the same data.
export { overviewFor } from './overview'
export { homeFor } from './home'
export { notificationsFor, type Notification } from './notifications'
