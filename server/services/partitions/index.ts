// Monthly partitions of deliveries and delivery attempts (issue 23, point 4): months made
// ahead, default-partition rows moved into their month, retention by whole months, sizes.
export { kickPartitions, maintainPartitions, partitionSettings } from './jobs'
