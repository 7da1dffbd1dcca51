// The database schema, one file per area under tables/ (named as the service capabilities
// are); drizzle.config.ts and the app read it through this file.
export * from './tables/orgs'
export * from './tables/access'
export * from './tables/audit'
export * from './tables/mail'
export * from './tables/instruments'
export * from './tables/results'
export * from './tables/ingest'
export * from './tables/partners'
export * from './tables/schemas'
export * from './tables/delivery'
export * from './tables/isotopes'
export * from './tables/lifecycle'
