/** A refusal of the engine: `field` names the input at fault, `code` says what is wrong. */
export class EngineError extends Error {
  constructor(readonly field: string, readonly code: string, message: string) {
    super(`${field}: ${message}`)
    this.name = 'EngineError'
  }
}

/** Throws unless every value of `values` is a finite number. */
export function assertFiniteColumn(field: string, values: ArrayLike<number | null | undefined>) {
  for (let i = 0; i < values.length; i++) {
    const v = values[i]
    if (typeof v !== 'number' || !Number.isFinite(v)) {
      throw new EngineError(`${field}[${i}]`, 'not-finite', `must be a finite number, got ${v === null ? 'null' : String(v)}`)
    }
  }
}

export function assertPositive(field: string, value: number) {
  if (!Number.isFinite(value) || value <= 0) throw new EngineError(field, 'not-positive', `must be a positive number, got ${value}`)
}
