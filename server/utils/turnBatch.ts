// Calls made in the same turn of the event loop, handed to one function together. Under load
// a server has many requests at the same step at once; one statement for all of them pays a
// statement's fixed costs (round trip, executor start-up, locks, commit) once. A lone call
// waits no longer than that turn (setImmediate). Own code: the batching packages on npm
// (dataloader and the like) cache and dedupe reads by key, which none of these callers want.

export type Outcome<R> = { value: R } | { error: unknown }

/**
 * A function whose calls of one turn (per `keyOf`, when given) reach `run` as one list;
 * `run` answers with one outcome per item, in order, and each caller gets its own.
 */
export function batchPerTurn<Q, R>(run: (items: Q[]) => Promise<Outcome<R>[]>, keyOf: (item: Q) => string = () => ''): (item: Q) => Promise<R> {
  const waiting = new Map<string, { items: Q[], settle: ((outcome: Outcome<R>) => void)[] }>()
  return item => new Promise<R>((resolve, reject) => {
    const key = keyOf(item)
    let group = waiting.get(key)
    if (!group) {
      const g = { items: [] as Q[], settle: [] as ((outcome: Outcome<R>) => void)[] }
      waiting.set(key, group = g)
      setImmediate(() => {
        waiting.delete(key)
        run(g.items).then(
          outcomes => g.settle.forEach((settle, i) => settle(outcomes[i] ?? { error: new Error('no outcome for a batched call') })),
          error => g.settle.forEach(settle => settle({ error })),
        )
      })
    }
    group.items.push(item)
    group.settle.push(outcome => 'error' in outcome ? reject(outcome.error) : resolve(outcome.value))
  })
}
