import { EngineError } from '#shared/engine'

/** An engine refusal as a 422 naming the field ("sweep.values[2]" becomes "sweep.values.2"). */
export function engineProblem(error: unknown, prefix = ''): never {
  if (error instanceof EngineError) {
    const path = `${prefix}${error.field.replace(/\[(\d+)\]/g, '.$1')}`
    throw fieldProblem(path, error.message.replace(/^[^:]+: /, ''), 422, `engine-${error.code}`)
  }
  throw error
}
