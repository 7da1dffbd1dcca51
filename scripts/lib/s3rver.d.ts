// s3rver 3.7 ships no types; what scripts/lib/store-fake.ts uses of it.
declare module 's3rver' {
  import type { Server } from 'node:http'
  interface S3rverOptions { port?: number, address?: string, silent?: boolean, directory: string, configureBuckets?: { name: string }[], resetOnClose?: boolean }
  export default class S3rver {
    constructor(options: S3rverOptions)
    httpServer?: Server
    run(): Promise<{ port: number, address: string }>
    close(): Promise<void>
  }
}
