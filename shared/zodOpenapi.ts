import { extendZodWithOpenApi } from '@asteasolutions/zod-to-openapi'
import { z } from 'zod'

// Imported first by shared/openapi.ts, so schemas made after it carry `.openapi()`.
extendZodWithOpenApi(z)
